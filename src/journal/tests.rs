//! Journals: a line cut short, resuming, and gathering shards (common practice, no source: the
//! expected values are the definitions in the module documentation).

use super::*;
use crate::criteria::RequiredSource;
use crate::fireflow::{HydrantResult, Outcome};

fn result(hydrant: usize) -> HydrantResult {
    HydrantResult {
        hydrant,
        junction: hydrant,
        required_m3s: 0.1,
        required_source: RequiredSource::Default,
        available_m3s: Some(0.2 + hydrant as f64),
        static_kpa: None,
        residual_kpa: None,
        min_pressure_kpa: None,
        min_pressure_junction: None,
        critical_junction: None,
        critical_link: None,
        limited_by: None,
        outcome: Outcome::Pass,
        notes: Vec::new(),
        supply_paths: Vec::new(),
        delivered: None,
        solves: 1,
        iterations: 2,
        factorizations: 3,
        work_by_role: crate::fireflow::WorkByRole::default(),
    }
}

fn header(shard: Option<Shard>, total: usize) -> Header {
    let input = |p: &str, h: &str| InputRef {
        path: p.into(),
        absolute: p.into(),
        sha256: h.into(),
    };
    Header {
        firemain_journal: JOURNAL_FORMAT,
        generator: "firemain test".into(),
        network: input("net", "aa"),
        criteria: input("c.toml", "bb"),
        tests: None,
        project: None,
        hydrants: Vec::new(),
        shard,
        total,
    }
}

#[test]
fn a_line_cut_short_is_dropped_and_appending_goes_on_after_the_whole_lines() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join(JOURNAL_FILE);
    let w = JournalWriter::create(&path, &header(None, 3)).unwrap();
    w.record(&result(0));
    w.record(&result(1));
    w.finish().unwrap();
    // A kill in the middle of the third line.
    let mut bytes = std::fs::read(&path).unwrap();
    bytes.extend_from_slice(b"{\"hydrant\":2,\"junc");
    std::fs::write(&path, &bytes).unwrap();
    let j = read_journal(&path).unwrap();
    assert_eq!(j.results.len(), 2);
    assert_eq!(j.complete, None);
    let w = JournalWriter::resume(&path, &j).unwrap();
    w.record(&result(2));
    w.finish().unwrap();
    let j = read_journal(&path).unwrap();
    let ids: Vec<usize> = j.results.iter().map(|r| r.hydrant).collect();
    assert_eq!(ids, [0, 1, 2]);
}

#[test]
fn a_damaged_line_inside_is_an_error_naming_it() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join(JOURNAL_FILE);
    let w = JournalWriter::create(&path, &header(None, 2)).unwrap();
    w.record(&result(0));
    w.finish().unwrap();
    let mut text = std::fs::read_to_string(&path).unwrap();
    text.push_str("garbage\n");
    std::fs::write(&path, text).unwrap();
    let e = read_journal(&path).unwrap_err().to_string();
    assert!(e.contains("line 3"), "{e}");
}

#[test]
fn shards_parse_from_zero_and_interleave() {
    assert_eq!(
        "1/4".parse::<Shard>().unwrap(),
        Shard { index: 1, count: 4 }
    );
    assert!("4/4".parse::<Shard>().unwrap_err().contains("from 0 to 3"));
    assert!("1/0".parse::<Shard>().is_err());
    assert!("x".parse::<Shard>().is_err());
    let s = Shard { index: 1, count: 3 };
    assert_eq!(s.positions(8).collect::<Vec<_>>(), [1, 4, 7]);
    // Every position in exactly one shard.
    for p in 0..20 {
        assert_eq!(
            (0..3)
                .filter(|&k| Shard { index: k, count: 3 }.picks(p))
                .count(),
            1
        );
    }
}

fn write_partial(dir: &Path, shard: Shard, header: Header, hydrants: &[usize]) {
    let path = dir.join(shard_journal_name(shard));
    let w = JournalWriter::create(&path, &header).unwrap();
    for &h in hydrants {
        w.record(&result(h));
    }
    w.into_partial(&dir.join(partial_name(shard))).unwrap();
}

#[test]
fn merge_lists_missing_shards_and_refuses_duplicates_and_other_inputs() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("a");
    let b = dir.path().join("b");
    std::fs::create_dir_all(&a).unwrap();
    std::fs::create_dir_all(&b).unwrap();
    let s = |k| Shard { index: k, count: 3 };
    write_partial(&a, s(0), header(Some(s(0)), 2), &[0, 3]);
    // Shard 2 is running: only its journal exists.
    JournalWriter::create(&a.join(shard_journal_name(s(2))), &header(Some(s(2)), 1))
        .unwrap()
        .finish()
        .unwrap();
    let e = gather(std::slice::from_ref(&a)).unwrap_err().to_string();
    assert!(e.contains("missing 2 of 3 shard(s): 1/3, 2/3"), "{e}");
    assert!(e.contains("check-journal-2-of-3.jsonl"), "{e}");

    write_partial(&b, s(1), header(Some(s(1)), 1), &[1]);
    write_partial(&b, s(0), header(Some(s(0)), 2), &[0, 3]);
    write_partial(&b, s(2), header(Some(s(2)), 1), &[2]);
    let e = gather(&[a.clone(), b.clone()]).unwrap_err().to_string();
    assert!(e.contains("shard 0/3 in") && e.contains("twice"), "{e}");

    let g = gather(std::slice::from_ref(&b)).unwrap();
    let order: Vec<usize> = g
        .assemble(&[0, 1, 2, 3], |i| i.to_string())
        .unwrap()
        .iter()
        .map(|r| r.hydrant)
        .collect();
    assert_eq!(order, [0, 1, 2, 3]);

    let mut other = header(Some(s(1)), 1);
    other.criteria.sha256 = "cc".into();
    write_partial(&b, s(1), other, &[1]);
    let e = gather(std::slice::from_ref(&b)).unwrap_err().to_string();
    assert!(e.contains("the criteria differ"), "{e}");

    // A partial of another version (its figures may come from another method) is refused.
    let mut older = header(Some(s(1)), 1);
    older.generator = "firemain 0.1.0".into();
    write_partial(&b, s(1), older, &[1]);
    let e = gather(&[b]).unwrap_err().to_string();
    assert!(e.contains("written by different firemain versions"), "{e}");
}
