//! The atomic output machinery shared by both writers.

use std::io::Read;

use quarry_csv::{EventWriter, RowWriter};
use quarry_event::Event;

#[derive(serde::Serialize)]
struct Row {
    event: u64,
    status: &'static str,
    m_reco: f64,
    chi2: Option<f64>,
}

fn dir_entries(dir: &std::path::Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

#[test]
fn row_writer_is_atomic_and_keeps_field_order() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("result.csv");
    std::fs::write(&path, "old contents\n").unwrap();
    let mut w = RowWriter::create(&path).unwrap();
    w.write(&Row {
        event: 3,
        status: "ok",
        m_reco: 0.1 + 0.2,
        chi2: Some(1.25),
    })
    .unwrap();
    w.write(&Row {
        event: 4,
        status: "no-solution",
        m_reco: f64::NAN,
        chi2: None,
    })
    .unwrap();
    // Before finish the old file is untouched and a hidden temp file exists.
    assert_eq!(std::fs::read_to_string(&path).unwrap(), "old contents\n");
    let entries = dir_entries(dir.path());
    assert_eq!(entries.len(), 2, "{entries:?}");
    assert!(
        entries.iter().any(|e| e.starts_with(".result.csv.tmp-")),
        "{entries:?}"
    );
    w.finish().unwrap();
    assert_eq!(
        std::fs::read_to_string(&path).unwrap(),
        "event,status,m_reco,chi2\n3,ok,0.30000000000000004,1.25\n4,no-solution,NaN,\n"
    );
    assert_eq!(dir_entries(dir.path()), vec!["result.csv".to_string()]);
}

#[test]
fn dropping_without_finish_removes_the_temp_file() {
    let dir = tempfile::tempdir().unwrap();
    {
        let mut w = RowWriter::create(&dir.path().join("a.csv")).unwrap();
        w.write(&Row {
            event: 1,
            status: "ok",
            m_reco: 1.0,
            chi2: None,
        })
        .unwrap();
        let mut e = EventWriter::create(&dir.path().join("b.csv.gz")).unwrap();
        e.write(&Event::new(1)).unwrap();
        assert_eq!(dir_entries(dir.path()).len(), 2);
    }
    assert!(
        dir_entries(dir.path()).is_empty(),
        "{:?}",
        dir_entries(dir.path())
    );
}

#[test]
fn gz_suffix_gzips() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("rows.csv.gz");
    let mut w = RowWriter::create(&path).unwrap();
    w.write(&Row {
        event: 9,
        status: "ok",
        m_reco: 172.5,
        chi2: Some(0.5),
    })
    .unwrap();
    w.finish().unwrap();
    let raw = std::fs::read(&path).unwrap();
    assert_eq!(&raw[..2], &[0x1f, 0x8b], "gzip magic");
    let mut text = String::new();
    flate2::read::GzDecoder::new(&raw[..])
        .read_to_string(&mut text)
        .unwrap();
    assert_eq!(text, "event,status,m_reco,chi2\n9,ok,172.5,0.5\n");
}

#[test]
fn unwritable_output_is_a_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("no-such-dir").join("out.csv");
    let err = match EventWriter::create(&path) {
        Ok(_) => panic!("created a file in a missing folder"),
        Err(e) => e.to_string(),
    };
    assert!(
        err.starts_with(&format!("{}: write error: ", path.display())),
        "{err}"
    );
    // The missing directory is named, not just "No such file".
    assert!(
        err.contains(&format!(
            "output directory '{}' does not exist",
            dir.path().join("no-such-dir").display()
        )),
        "{err}"
    );
}

/// `-o link` where `link` is a symbolic link: the file it points to gets
/// the output and the link stays a link (docs/cli.md, "Outputs").
#[cfg(unix)]
#[test]
fn a_symlinked_output_is_written_through() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("real")).unwrap();
    let target = dir.path().join("real").join("out.csv");
    std::fs::write(&target, "old\n").unwrap();
    let link = dir.path().join("link.csv");
    std::os::unix::fs::symlink("real/out.csv", &link).unwrap();
    let mut w = RowWriter::create(&link).unwrap();
    let tmp = w.temp_path().unwrap().to_path_buf();
    assert_eq!(tmp.parent(), target.parent(), "temp file beside the target");
    w.write(&Row {
        event: 1,
        status: "ok",
        m_reco: 1.0,
        chi2: None,
    })
    .unwrap();
    w.finish().unwrap();
    assert!(std::fs::symlink_metadata(&link)
        .unwrap()
        .file_type()
        .is_symlink());
    assert_eq!(
        std::fs::read_to_string(&target).unwrap(),
        "event,status,m_reco,chi2\n1,ok,1.0,\n"
    );
    assert!(!tmp.exists());
}

/// An existing output keeps its permission bits when it is replaced.
#[cfg(unix)]
#[test]
fn an_existing_output_keeps_its_mode() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("out.csv");
    std::fs::write(&path, "old\n").unwrap();
    std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o640)).unwrap();
    let mut w = EventWriter::create(&path).unwrap();
    w.write(&Event::new(3)).unwrap();
    w.finish().unwrap();
    let mode = std::fs::metadata(&path).unwrap().permissions().mode() & 0o777;
    assert_eq!(mode, 0o640);
}

/// Makes a FIFO with the system's `mkfifo`; `false` if that is unavailable.
#[cfg(unix)]
fn make_fifo(path: &std::path::Path) -> bool {
    std::process::Command::new("mkfifo")
        .arg(path)
        .status()
        .is_ok_and(|s| s.success())
}

#[cfg(unix)]
fn is_fifo(path: &std::path::Path) -> bool {
    use std::os::unix::fs::FileTypeExt;
    std::fs::symlink_metadata(path)
        .unwrap()
        .file_type()
        .is_fifo()
}

/// A temp-file-and-rename writer must never replace a device node, a FIFO
/// or a directory that already sits under the target name.
#[cfg(unix)]
#[test]
fn writers_refuse_targets_that_are_not_regular_files() {
    let dir = tempfile::tempdir().unwrap();
    let fifo = dir.path().join("pipe.csv");
    assert!(make_fifo(&fifo), "mkfifo failed");
    let expect = "exists and is not a regular file";
    let err = RowWriter::<Row>::create(&fifo).err().expect("FIFO refused");
    assert!(err.to_string().contains(expect), "{err}");
    assert!(
        err.to_string().starts_with(&fifo.display().to_string()),
        "{err}"
    );
    let err = EventWriter::create(&fifo).err().expect("FIFO refused");
    assert!(err.to_string().contains(expect), "{err}");
    assert!(is_fifo(&fifo), "the FIFO must be left in place");

    let sub = dir.path().join("subdir.csv");
    std::fs::create_dir(&sub).unwrap();
    let err = EventWriter::create(&sub).err().expect("directory refused");
    assert!(err.to_string().contains(expect), "{err}");
    assert!(sub.is_dir());

    // A symbolic link to a FIFO is followed and refused as well.
    let link = dir.path().join("link.csv");
    std::os::unix::fs::symlink(&fifo, &link).unwrap();
    let err = RowWriter::<Row>::create(&link).err().expect("link refused");
    assert!(err.to_string().contains(expect), "{err}");

    // Nothing but the three entries made here: no temp file left behind.
    assert_eq!(
        dir_entries(dir.path()),
        vec![
            "link.csv".to_string(),
            "pipe.csv".into(),
            "subdir.csv".into()
        ]
    );
}

/// The check is repeated at `finish`: a FIFO that appears under the target
/// name after `create` is not replaced either.
#[cfg(unix)]
#[test]
fn finish_refuses_a_target_that_became_a_fifo() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("late.csv");
    let mut w = EventWriter::create(&path).unwrap();
    w.write(&Event::new(1)).unwrap();
    assert!(make_fifo(&path), "mkfifo failed");
    let err = w.finish().expect_err("refused at finish");
    assert!(
        err.to_string().contains("exists and is not a regular file"),
        "{err}"
    );
    assert!(is_fifo(&path));
    assert_eq!(dir_entries(dir.path()), vec!["late.csv".to_string()]);
}

#[derive(Default, serde::Serialize)]
struct TextRow {
    ordinal: u64,
    reason: String,
    mass: Option<f64>,
}

/// Rows formatted on worker threads (`encode_rows` + `write_encoded`) must
/// give the same bytes as rows written one by one, quoting included (the
/// reference is the csv crate's own serializer behind `write`).
#[test]
fn encoded_blocks_write_the_same_bytes_as_rows() {
    let rows: Vec<TextRow> = [
        ("plain", Some(172.5)),
        ("comma, inside", None),
        ("quote \" inside", Some(1e-9)),
        ("new\nline", Some(-0.0)),
        ("", Some(1e300)),
    ]
    .iter()
    .enumerate()
    .map(|(i, &(reason, mass))| TextRow {
        ordinal: i as u64,
        reason: reason.to_string(),
        mass,
    })
    .collect();
    let dir = tempfile::tempdir().unwrap();
    let one_by_one = dir.path().join("rows.csv");
    let mut w = RowWriter::create(&one_by_one).unwrap();
    for r in &rows {
        w.write(r).unwrap();
    }
    w.finish().unwrap();
    let encoded = dir.path().join("encoded.csv");
    let mut w = RowWriter::<TextRow>::create(&encoded).unwrap();
    w.write_encoded(&[]).unwrap();
    for pair in rows.chunks(2) {
        w.write_encoded(&quarry_csv::encode_rows(pair).unwrap())
            .unwrap();
    }
    w.finish().unwrap();
    let expected = std::fs::read(&one_by_one).unwrap();
    assert!(expected.starts_with(b"ordinal,reason,mass\n"));
    assert_eq!(std::fs::read(&encoded).unwrap(), expected);

    // No rows at all: an empty file, as with `write`.
    let empty = dir.path().join("empty.csv");
    let mut w = RowWriter::<TextRow>::create(&empty).unwrap();
    w.write_encoded(&[]).unwrap();
    w.finish().unwrap();
    assert!(std::fs::read(&empty).unwrap().is_empty());

    // The two ways cannot be mixed on one output.
    let mut w = RowWriter::<TextRow>::create(&dir.path().join("mixed.csv")).unwrap();
    w.write(&rows[0]).unwrap();
    assert!(w.write_encoded(b"1,x,\n").is_err());
}

#[derive(serde::Serialize)]
struct OneText {
    text: String,
}

/// `RecordText` quotes and terminates fields as the csv crate does
/// (the reference), including its one-empty-field record.
#[test]
fn record_text_matches_the_csv_crate() {
    for text in [
        "",
        "plain",
        "a,b",
        "say \"hi\"",
        "cr\rlf\n",
        " spaced ",
        "é;=",
    ] {
        let mut ours = Vec::new();
        let mut r = quarry_csv::RecordText::new(&mut ours);
        r.text(text);
        r.end();
        let reference = quarry_csv::encode_rows(&[OneText {
            text: text.to_string(),
        }])
        .unwrap();
        assert_eq!(ours, reference, "{text:?}");
    }
    let mut ours = Vec::new();
    let mut r = quarry_csv::RecordText::new(&mut ours);
    r.uint(Some(u64::MAX));
    r.uint(Some(0));
    r.float(Some(0.0));
    r.float(Some(1e16));
    r.float(Some(-2.5e-7));
    r.float(None);
    r.end();
    assert_eq!(ours, b"18446744073709551615,0,0.0,1e16,-2.5e-7,\n");
    let reference =
        quarry_csv::encode_rows(&[(u64::MAX, 0u8, 0.0f64, 1e16f64, -2.5e-7f64, None::<f64>)])
            .unwrap();
    assert_eq!(ours, reference);
}
