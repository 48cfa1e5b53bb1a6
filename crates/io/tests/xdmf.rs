//! The XDMF sidecar is well-formed XML (parsed by roxmltree, a general-purpose XML parser)
//! with the structure of XDMF 3 (xdmf.org, "XDMF Model and Format"; element and attribute
//! names from that page, from memory): a temporal collection of uniform grids, each with a
//! Polyvertex topology, XYZ geometry and node-centred attributes whose HDF data items name
//! datasets that exist in `run.h5` with the dimensions given, as `h5ls` lists them.

mod common;

use common::*;
use spindrift_io::{write_xdmf, RunFile, RunReader};

fn dims(s: &str) -> Vec<usize> {
    s.split_whitespace().map(|t| t.parse().expect("dimension")).collect()
}

fn check_sidecar(dir: &std::path::Path, expect_grids: usize) {
    let text = std::fs::read_to_string(dir.join("run.xdmf")).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("well-formed XML");
    let listed = h5ls_datasets(&dir.join("run.h5"));
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "Xdmf");
    assert_eq!(root.attribute("Version"), Some("3.0"));
    let domain = root.children().find(|n| n.has_tag_name("Domain")).expect("Domain");
    let coll = domain.children().find(|n| n.has_tag_name("Grid")).expect("collection grid");
    assert_eq!(coll.attribute("GridType"), Some("Collection"));
    assert_eq!(coll.attribute("CollectionType"), Some("Temporal"));
    let grids: Vec<_> = coll.children().filter(|n| n.has_tag_name("Grid")).collect();
    assert_eq!(grids.len(), expect_grids);

    let mut last_time = f64::NEG_INFINITY;
    for g in &grids {
        let name = g.attribute("Name").unwrap_or("?");
        let child =
            |tag: &str| g.children().find(|n| n.has_tag_name(tag)).unwrap_or_else(|| panic!("{name}: {tag}"));
        let t: f64 = child("Time").attribute("Value").unwrap().parse().unwrap();
        assert!(t > last_time, "{name}: times increase");
        last_time = t;
        let topo = child("Topology");
        assert_eq!(topo.attribute("TopologyType"), Some("Polyvertex"));
        assert_eq!(topo.attribute("NumberOfElements"), Some(SITES.to_string().as_str()));
        assert_eq!(child("Geometry").attribute("GeometryType"), Some("XYZ"));

        // Every HDF data item names an existing dataset with the stated dimensions.
        for item in
            g.descendants().filter(|n| n.has_tag_name("DataItem") && n.attribute("Format") == Some("HDF"))
        {
            let reference = item.text().unwrap().trim();
            let (file, path) = reference.split_once(':').expect("file:path");
            assert_eq!(file, "run.h5");
            let d = listed.get(path).unwrap_or_else(|| panic!("{name}: {path} is not in run.h5"));
            assert_eq!(dims(item.attribute("Dimensions").unwrap()), d.dims, "{name}: dimensions of {path}");
        }
        let attrs: Vec<_> = g.children().filter(|n| n.has_tag_name("Attribute")).collect();
        let names: Vec<_> = attrs.iter().map(|a| a.attribute("Name").unwrap()).collect();
        assert_eq!(names, vec!["spin", "layer", "species"]);
        let spin = attrs[0];
        assert_eq!(spin.attribute("AttributeType"), Some("Vector"));
        assert_eq!(spin.attribute("Center"), Some("Node"));
        let item = spin.children().find(|n| n.has_tag_name("DataItem")).unwrap();
        if item.attribute("ItemType") == Some("HyperSlab") {
            // start / stride / count rows, then the source dataset.
            let inner: Vec<_> = item.children().filter(|n| n.has_tag_name("DataItem")).collect();
            assert_eq!(inner.len(), 2);
            assert_eq!(dims(inner[0].attribute("Dimensions").unwrap()), vec![3, 3]);
            let sel = dims(inner[0].text().unwrap());
            let (start, stride, count) = (&sel[0..3], &sel[3..6], &sel[6..9]);
            let source = dims(inner[1].attribute("Dimensions").unwrap());
            assert!(start[0] < source[0], "{name}: snapshot index inside the dataset");
            assert_eq!(&start[1..], &[0, 0]);
            assert_eq!(stride, &[1, 1, 1]);
            assert_eq!(count, &[1, SITES, 3]);
            assert_eq!(
                dims(item.attribute("Dimensions").unwrap()),
                count.to_vec(),
                "{name}: slab dimensions = count"
            );
        } else {
            assert_eq!(item.text().unwrap().trim(), "run.h5:/final/spins");
        }
    }
}

#[test]
fn xdmf_sidecar_is_well_formed_and_matches_the_datasets() {
    let tmp = TempDir::new("xdmf");
    let mut f = RunFile::create(tmp.path()).unwrap();
    apply(&mut f, &script());
    f.write_xdmf().unwrap();
    f.close().unwrap();
    // 3 + 2 + 1 snapshots and the final state.
    check_sidecar(tmp.path(), 7);

    // The same file written from a reader (as after an early stop) is identical.
    let first = std::fs::read_to_string(tmp.path().join("run.xdmf")).unwrap();
    let r = RunReader::open(tmp.path()).unwrap();
    let counts = r.snapshot_counts().unwrap();
    let has_final = r.final_spins().unwrap().is_some();
    let sites = r.lattice().unwrap().position.len();
    drop(r);
    write_xdmf(tmp.path(), sites, &counts, has_final).unwrap();
    assert_eq!(std::fs::read_to_string(tmp.path().join("run.xdmf")).unwrap(), first);
}

#[test]
fn xdmf_of_a_stopped_run_has_no_final_grid() {
    let tmp = TempDir::new("xdmf-stopped");
    let events = script();
    let cut = events.iter().position(|e| matches!(e, Event::Begin(i) if i.index == 1)).unwrap();
    let mut f = RunFile::create(tmp.path()).unwrap();
    apply(&mut f, &events[..cut]);
    f.write_xdmf().unwrap();
    f.close().unwrap();
    check_sidecar(tmp.path(), 3);
    let text = std::fs::read_to_string(tmp.path().join("run.xdmf")).unwrap();
    assert!(!text.contains("/final/spins"));
}
