//! `run.xdmf`: an XDMF 3 sidecar (the open eXtensible Data Model and Format, xdmf.org) that
//! lets visualisation tools open the spins of `run.h5` as a time series of point clouds.
//!
//! The file is one temporal collection. Each snapshot of each stage, in stage order, and then
//! the final state is a uniform grid with
//! - a `Polyvertex` topology of `N` points at `/lattice/position` (Å),
//! - a node-centred `Vector` attribute `spin`: a hyperslab of one snapshot out of
//!   `/stage_NNN/snapshots/spins` (or `/final/spins`),
//! - node-centred `Scalar` attributes `layer` and `species` from `/lattice`.
//!
//! Stage times restart at zero in every stage (and relaxation has none), so the collection's
//! `Time` is the frame number (0, 1, 2, ...); each grid names its stage and snapshot index in
//! `Information` elements.

use std::fmt::Write as _;
use std::path::Path;

use crate::error::IoError;
use crate::layout::{stage_group_name, RUN_FILE, XDMF_FILE};
use crate::summary::write_atomic;

/// Writes `DIR/run.xdmf` for a run of `n_sites` sites whose stage `i` holds
/// `snapshot_count_per_stage[i]` snapshots, plus the final state when `has_final`.
pub fn write_xdmf(
    dir: &Path,
    n_sites: usize,
    snapshot_count_per_stage: &[u64],
    has_final: bool,
) -> Result<(), IoError> {
    let path = dir.join(XDMF_FILE);
    let text = xdmf_text(n_sites, snapshot_count_per_stage, has_final);
    write_atomic(dir, &path, text.as_bytes())
}

/// The XML text of the sidecar (see [`write_xdmf`]).
pub fn xdmf_text(n_sites: usize, snapshot_count_per_stage: &[u64], has_final: bool) -> String {
    let n = n_sites;
    let mut x = String::new();
    // Writing to a String cannot fail, so the results of writeln! are ignored below.
    x.push_str("<?xml version=\"1.0\" encoding=\"utf-8\"?>\n");
    x.push_str("<Xdmf xmlns:xi=\"http://www.w3.org/2001/XInclude\" Version=\"3.0\">\n");
    x.push_str("  <Domain>\n");
    x.push_str("    <Grid Name=\"spins\" GridType=\"Collection\" CollectionType=\"Temporal\">\n");
    let mut frame = 0u64;
    for (stage, &count) in snapshot_count_per_stage.iter().enumerate() {
        let group = stage_group_name(stage);
        for k in 0..count {
            let spin = format!(
                concat!(
                    "          <DataItem ItemType=\"HyperSlab\" Dimensions=\"1 {n} 3\" Type=\"HyperSlab\">\n",
                    "            <DataItem Dimensions=\"3 3\" NumberType=\"UInt\" Format=\"XML\">{k} 0 0 1 1 1 1 {n} 3</DataItem>\n",
                    "            <DataItem Dimensions=\"{count} {n} 3\" NumberType=\"Float\" Precision=\"8\" Format=\"HDF\">{file}:/{group}/snapshots/spins</DataItem>\n",
                    "          </DataItem>\n"
                ),
                n = n,
                k = k,
                count = count,
                file = RUN_FILE,
                group = group
            );
            grid(
                &mut x,
                &format!("{group}_snapshot_{k}"),
                frame,
                &[("stage", stage as u64), ("snapshot", k)],
                n,
                &spin,
            );
            frame += 1;
        }
    }
    if has_final {
        let spin = format!(
            "          <DataItem Dimensions=\"{n} 3\" NumberType=\"Float\" Precision=\"8\" Format=\"HDF\">{RUN_FILE}:/final/spins</DataItem>\n"
        );
        grid(&mut x, "final", frame, &[], n, &spin);
    }
    x.push_str("    </Grid>\n");
    x.push_str("  </Domain>\n");
    x.push_str("</Xdmf>\n");
    x
}

fn grid(x: &mut String, name: &str, frame: u64, info: &[(&str, u64)], n: usize, spin_item: &str) {
    let _ = writeln!(x, "      <Grid Name=\"{name}\" GridType=\"Uniform\">");
    let _ = writeln!(x, "        <Time Value=\"{frame}\"/>");
    for (key, value) in info {
        let _ = writeln!(x, "        <Information Name=\"{key}\" Value=\"{value}\"/>");
    }
    let _ = writeln!(
        x,
        "        <Topology TopologyType=\"Polyvertex\" NumberOfElements=\"{n}\" NodesPerElement=\"1\"/>"
    );
    let _ = writeln!(x, "        <Geometry GeometryType=\"XYZ\">");
    let _ = writeln!(
        x,
        "          <DataItem Dimensions=\"{n} 3\" NumberType=\"Float\" Precision=\"8\" Format=\"HDF\">{RUN_FILE}:/lattice/position</DataItem>"
    );
    let _ = writeln!(x, "        </Geometry>");
    let _ = writeln!(x, "        <Attribute Name=\"spin\" AttributeType=\"Vector\" Center=\"Node\">");
    x.push_str(spin_item);
    let _ = writeln!(x, "        </Attribute>");
    for name in ["layer", "species"] {
        let _ = writeln!(x, "        <Attribute Name=\"{name}\" AttributeType=\"Scalar\" Center=\"Node\">");
        let _ = writeln!(
            x,
            "          <DataItem Dimensions=\"{n}\" NumberType=\"UInt\" Precision=\"4\" Format=\"HDF\">{RUN_FILE}:/lattice/{name}</DataItem>"
        );
        let _ = writeln!(x, "        </Attribute>");
    }
    let _ = writeln!(x, "      </Grid>");
}
