//! Exact errors of the readers for hostile and damaged files, one class at a
//! time: a failing reader thread, declared sizes and row counts, gzip
//! integrity, ambiguous columns and identifiers, non-regular files, VOTable
//! features that are refused, and CSV positions. Files are made in a temporary
//! folder from the fixtures of `tests/fixtures/readers/` (written by astropy
//! 6.1.7, see its README) and the demo catalogs of `demo_catalogs/fl1/`.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Arc;

use arrow::array::{ArrayRef, Int32Array, RecordBatch};
use arrow::datatypes::{DataType, Field, Schema};
use fluxloom::catalog::fits::{FitsOptions, read_fits};
use fluxloom::catalog::parquet::read_parquet;
use fluxloom::catalog::schema::{CsvOptions, FileFormat};
use fluxloom::catalog::votable::{VotableOptions, read_votable};
use fluxloom::catalog::{CatalogBatches, DeclaredRows, check_unique_column, open, prefetch};

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn fixture(name: &str) -> Vec<u8> {
    std::fs::read(repo().join("tests/fixtures/readers").join(name)).unwrap()
}

fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

fn gzip(bytes: &[u8]) -> Vec<u8> {
    let mut e = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    e.write_all(bytes).unwrap();
    e.finish().unwrap()
}

fn fits_options() -> FitsOptions {
    FitsOptions {
        hdu: None,
        batch_rows: 4,
    }
}

fn vot_options() -> VotableOptions {
    VotableOptions {
        table_index: 0,
        batch_rows: 4,
    }
}

/// Reads a stream to its end: the batches, or the error text.
fn drain(stream: fluxloom::Result<CatalogBatches>) -> Result<Vec<RecordBatch>, String> {
    stream
        .and_then(|s| s.collect_all())
        .map_err(|e| e.to_string())
}

/// Replaces the card of HDU 1 (its header starts at byte 5760) that starts with
/// `keyword` by `card`, padded to 80 bytes.
fn set_card(bytes: &mut [u8], keyword: &str, card: &str) {
    let key = format!("{keyword:<8}=");
    let at = (72..bytes.len() / 80)
        .map(|i| i * 80)
        .find(|&i| bytes[i..].starts_with(key.as_bytes()))
        .unwrap_or_else(|| panic!("no card {keyword}"));
    bytes[at..at + 80].copy_from_slice(format!("{card:<80}").as_bytes());
}

struct Run {
    code: i32,
    stderr: String,
}

fn fluxloom(args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(args)
        .current_dir(repo())
        .output()
        .unwrap();
    Run {
        code: out.status.code().unwrap_or(-1),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

fn assert_error(run: &Run, expected: &str) {
    assert_eq!(run.code, 1, "{}", run.stderr);
    assert_eq!(run.stderr.trim_end(), expected);
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

fn one_column_batch(values: Vec<i32>) -> RecordBatch {
    let schema = Arc::new(Schema::new(vec![Field::new("v", DataType::Int32, false)]));
    RecordBatch::try_new(schema, vec![Arc::new(Int32Array::from(values)) as ArrayRef]).unwrap()
}

// 1. A failing reader fails the run.

#[test]
fn a_panic_on_the_reader_thread_is_an_error_not_an_end() {
    let batch = one_column_batch(vec![1, 2]);
    let schema = batch.schema();
    let batches = (0..3).map(move |i| {
        if i == 2 {
            panic!("injected failure");
        }
        Ok(batch.clone())
    });
    let stream = prefetch(
        CatalogBatches {
            path: PathBuf::from("broken.parquet"),
            schema,
            batches: Box::new(batches),
        },
        1,
    );
    let items: Vec<_> = stream.batches.collect();
    assert_eq!(items.len(), 3);
    assert!(items[0].is_ok() && items[1].is_ok());
    assert_eq!(
        items[2].as_ref().unwrap_err().to_string(),
        "broken.parquet: the reader failed on the file's contents (injected failure); the file is corrupt or not in the format its schema names"
    );
}

#[test]
fn rows_read_are_checked_against_the_declared_count() {
    let batch = one_column_batch(vec![1, 2, 3]);
    let short = DeclaredRows::new(
        vec![Ok(batch.clone())].into_iter(),
        Path::new("t.fits"),
        5,
        "NAXIS2",
    );
    let items: Vec<_> = short.collect();
    assert_eq!(
        items[1].as_ref().unwrap_err().to_string(),
        "t.fits: the file declares 5 rows (NAXIS2), but 3 rows were read"
    );
    let long = DeclaredRows::new(
        vec![Ok(batch.clone()), Ok(batch)].into_iter(),
        Path::new("t.fits"),
        4,
        "NAXIS2",
    );
    let items: Vec<_> = long.collect();
    assert_eq!(items.len(), 2);
    assert_eq!(
        items[1].as_ref().unwrap_err().to_string(),
        "t.fits: the file declares 4 rows (NAXIS2), but 6 rows were read"
    );
}

#[test]
fn a_parquet_footer_declaring_more_rows_than_its_row_groups_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let batch = one_column_batch((0..7).collect());
    let mut bytes = Vec::new();
    let mut w = parquet::arrow::ArrowWriter::try_new(&mut bytes, batch.schema(), None).unwrap();
    w.write(&batch).unwrap();
    w.close().unwrap();
    // The footer (Thrift compact protocol) holds FileMetaData.num_rows (field 3, i64)
    // as the bytes 0x16 then zigzag(7) = 0x0E, before the row groups' own counts.
    let n = bytes.len();
    let footer_len = u32::from_le_bytes(bytes[n - 8..n - 4].try_into().unwrap()) as usize;
    let start = n - 8 - footer_len;
    let at = start
        + bytes[start..]
            .windows(2)
            .position(|w| w == [0x16, 0x0E])
            .unwrap();
    bytes[at + 1] = 0x10;
    let path = write(dir.path(), "rows.parquet", &bytes);
    assert_eq!(
        drain(read_parquet(&path, 1024)).unwrap_err(),
        format!(
            "{}: the file declares 8 rows (in its Parquet metadata), but 7 rows were read",
            path.display()
        )
    );
}

/// The small Parquet file of `tests/reader_mutations.rs`: 24 rows in row groups of 8.
fn mutation_parquet() -> Vec<u8> {
    let schema = Arc::new(Schema::new(vec![
        Field::new("id", DataType::Int32, false),
        Field::new("flux", DataType::Float64, true),
        Field::new("name", DataType::Utf8, true),
    ]));
    let ids: Vec<i32> = (0..24).collect();
    let flux: Vec<Option<f64>> = (0..24)
        .map(|i| (i % 5 != 0).then_some(f64::from(i) * 1.5))
        .collect();
    let names: Vec<Option<String>> = (0..24)
        .map(|i| (i % 3 != 0).then(|| format!("obj{i}")))
        .collect();
    let columns: Vec<ArrayRef> = vec![
        Arc::new(Int32Array::from(ids)),
        Arc::new(arrow::array::Float64Array::from(flux)),
        Arc::new(arrow::array::StringArray::from(names)),
    ];
    let batch = RecordBatch::try_new(schema.clone(), columns).unwrap();
    let props = parquet::file::properties::WriterProperties::builder()
        .set_max_row_group_row_count(Some(8))
        .build();
    let mut out = Vec::new();
    let mut w = parquet::arrow::ArrowWriter::try_new(&mut out, schema, Some(props)).unwrap();
    w.write(&batch).unwrap();
    w.close().unwrap();
    out
}

#[test]
fn a_parquet_file_that_makes_the_library_panic_is_an_error_naming_it() {
    // Byte 1495 ^ 0x59 (found by the mutation suite) makes a column chunk's
    // start negative, on which the Parquet library panics.
    let dir = tempfile::tempdir().unwrap();
    let mut bytes = mutation_parquet();
    bytes[1495] ^= 0x59;
    let path = write(dir.path(), "panics.parquet", &bytes);
    let result = read_parquet(&path, 4).map(|s| prefetch(s, 2));
    assert_eq!(
        drain(result).unwrap_err(),
        format!(
            "{}: the reader failed on the file's contents (column start and length should not be negative); the file is corrupt or not in the format its schema names",
            path.display()
        )
    );
}

// 2. Header sizes are checked before anything is allocated.

#[test]
fn a_gzip_fits_declaring_a_huge_row_is_refused_before_allocating() {
    let dir = tempfile::tempdir().unwrap();
    let mut bytes = fixture("sources.fits");
    set_card(&mut bytes, "NAXIS1", "NAXIS1  =        1000000000000");
    let gz = gzip(&bytes);
    let path = write(dir.path(), "wide.fits.gz", &gz);
    let left = gz.len() as u64 * 1032 - 11_520;
    assert_eq!(
        drain(read_fits(&path, &fits_options())).unwrap_err(),
        format!(
            "{}: data of HDU 1 declares 10000000000000 bytes (NAXIS1 1000000000000 x NAXIS2 10), more than a gzip file of {} bytes can hold (at most {left} more bytes)",
            path.display(),
            gz.len()
        )
    );
}

#[test]
fn a_tform_repeat_that_overflows_the_row_width_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let mut bytes = fixture("sources.fits");
    set_card(&mut bytes, "TFORM7", "TFORM7  = '4611686018427387904D'");
    let path = write(dir.path(), "repeat.fits", &bytes);
    assert_eq!(
        drain(read_fits(&path, &fits_options())).unwrap_err(),
        format!(
            "{}: HDU 1, column 7 \"dcol\": TFORM7 = '4611686018427387904D' is wider than a row (NAXIS1 = 66 bytes)",
            path.display()
        )
    );
}

#[test]
fn a_header_that_does_not_start_with_simple_is_not_read_further() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "zeros.fits", &vec![0u8; 2880 * 40]);
    assert_eq!(
        drain(read_fits(&path, &fits_options())).unwrap_err(),
        format!(
            "{}: not a FITS file: the first card has no keyword, expected SIMPLE = T",
            path.display()
        )
    );
    let mut bytes = fixture("sources.fits");
    bytes[5760..5768].copy_from_slice(b"XTENDED ");
    let path = write(dir.path(), "ext.fits", &bytes);
    assert_eq!(
        drain(read_fits(&path, &fits_options())).unwrap_err(),
        format!(
            "{}: header of HDU 1 starts with keyword XTENDED, expected XTENSION",
            path.display()
        )
    );
    // A device that never ends is refused before a byte is read.
    let zero = Path::new("/dev/zero");
    let format = FileFormat::Fits { hdu: None };
    assert_eq!(
        drain(open(zero, &format, 4)).unwrap_err(),
        "/dev/zero: is a character device, expected a regular file (catalogs are read more than once; save the stream to a file first)"
    );
}

#[test]
fn a_votable_array_size_beyond_the_cap_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let text = r#"<?xml version="1.0"?>
<VOTABLE version="1.4"><RESOURCE><TABLE>
<FIELD name="a" datatype="double" arraysize="1000000000000"/>
<DATA><TABLEDATA><TR><TD/></TR></TABLEDATA></DATA>
</TABLE></RESOURCE></VOTABLE>
"#;
    let path = write(dir.path(), "huge.vot", text.as_bytes());
    assert_eq!(
        drain(read_votable(&path, &vot_options())).unwrap_err(),
        format!(
            "{}: FIELD 1 \"a\" has arraysize \"1000000000000\" (1000000000000 elements), expected at most 1048576 elements per cell",
            path.display()
        )
    );
}

// 3. Gzip integrity.

#[test]
fn a_gzip_checksum_mismatch_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let mut gz = gzip(&fixture("sources.fits"));
    let crc = gz.len() - 8;
    gz[crc] ^= 0x01;
    let path = write(dir.path(), "crc.fits.gz", &gz);
    assert_eq!(
        drain(read_fits(&path, &fits_options())).unwrap_err(),
        format!(
            "{}: broken or truncated compressed stream (gzip checksum, length or data): corrupt gzip stream does not have a matching checksum",
            path.display()
        )
    );
    let mut gz = gzip(b"id,mag\n1,10.5\n2,11.5\n");
    let size = gz.len() - 4;
    gz[size] ^= 0x01;
    let path = write(dir.path(), "len.csv.gz", &gz);
    assert_eq!(
        drain(fluxloom::catalog::csv::read_csv(
            &path,
            &CsvOptions::default(),
            4
        ))
        .unwrap_err(),
        format!(
            "{}: broken or truncated compressed stream (gzip checksum, length or data): corrupt gzip stream does not have a matching checksum",
            path.display()
        )
    );
}

#[test]
fn multi_member_gzip_files_are_read_whole() {
    let dir = tempfile::tempdir().unwrap();
    let fits = fixture("sources.fits");
    let mut members = gzip(&fits[..7000]);
    members.extend(gzip(&fits[7000..]));
    let whole = drain(read_fits(
        &write(dir.path(), "s.fits", &fits),
        &fits_options(),
    ))
    .unwrap();
    let path = write(dir.path(), "members.fits.gz", &members);
    assert_eq!(drain(read_fits(&path, &fits_options())).unwrap(), whole);

    let text = b"id,mag\n1,10.5\n2,11.5\n3,12.5\n";
    let mut members = gzip(&text[..12]);
    members.extend(gzip(&text[12..]));
    let path = write(dir.path(), "members.csv.gz", &members);
    let rows: usize = drain(fluxloom::catalog::csv::read_csv(
        &path,
        &CsvOptions::default(),
        2,
    ))
    .unwrap()
    .iter()
    .map(|b| b.num_rows())
    .sum();
    assert_eq!(rows, 3);
}

// 4. Ambiguous input.

#[test]
fn a_duplicated_column_named_by_the_schema_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let mut bytes = fixture("sources.fits");
    set_card(&mut bytes, "TTYPE4", "TTYPE4  = 'icol    '");
    let path = write(dir.path(), "dup.fits", &bytes);
    let table = read_fits(&path, &fits_options()).unwrap();
    assert_eq!(
        check_unique_column(&path, &table.schema, "icol")
            .unwrap_err()
            .to_string(),
        format!(
            "{}: the file has 2 columns named \"icol\" (columns 3, 4), which the schema names; expected exactly one",
            path.display()
        )
    );
    assert!(check_unique_column(&path, &table.schema, "bcol").is_ok());

    let schema = Arc::new(Schema::new(vec![
        Field::new("v", DataType::Int32, false),
        Field::new("v", DataType::Int32, false),
    ]));
    let column: ArrayRef = Arc::new(Int32Array::from(vec![1, 2]));
    let batch = RecordBatch::try_new(schema.clone(), vec![column.clone(), column]).unwrap();
    let mut out = Vec::new();
    let mut w = parquet::arrow::ArrowWriter::try_new(&mut out, schema, None).unwrap();
    w.write(&batch).unwrap();
    w.close().unwrap();
    let path = write(dir.path(), "dup.parquet", &out);
    let table = read_parquet(&path, 16).unwrap();
    assert_eq!(
        check_unique_column(&path, &table.schema, "v")
            .unwrap_err()
            .to_string(),
        format!(
            "{}: the file has 2 columns named \"v\" (columns 1, 2), which the schema names; expected exactly one",
            path.display()
        )
    );
}

#[test]
fn vet_refuses_a_duplicated_votable_field_the_schema_names() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo().join("demo_catalogs/fl1/lantern.vot")).unwrap();
    let text = text.replacen("<FIELD name=\"dec\"", "<FIELD name=\"ra\"", 1);
    let path = write(dir.path(), "lantern.vot", text.as_bytes());
    let run = fluxloom(&[
        "vet",
        s(&path),
        "--schema",
        "demo_catalogs/fl1/lantern.toml",
    ]);
    assert_error(
        &run,
        &format!(
            "fluxloom: error: {}: the file has 2 columns named \"ra\" (columns 2, 3), which the schema names; expected exactly one",
            path.display()
        ),
    );
}

#[test]
fn vet_refuses_repeated_source_identifiers_as_build_does() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo().join("demo_catalogs/lantern_nir.csv")).unwrap();
    let rows: Vec<&str> = text.lines().filter(|l| l.starts_with("LNS-")).collect();
    let mut repeated = text.clone();
    for row in &rows[..7] {
        repeated.push_str(row);
        repeated.push('\n');
    }
    let path = write(dir.path(), "repeated.csv", repeated.as_bytes());
    let run = fluxloom(&[
        "vet",
        s(&path),
        "--schema",
        "demo_catalogs/lantern_nir.toml",
    ]);
    let n = rows.len();
    let shown: Vec<String> = (1..=5)
        .map(|i| format!("\"LNS-{i:04}\" (rows {i} and {})", n + i))
        .collect();
    assert_error(
        &run,
        &format!(
            "fluxloom: error: catalog \"lantern\": 7 row(s) repeat the source identifier of an earlier row; the first 5: {}; identifiers must be unique within a catalog",
            shown.join(", ")
        ),
    );
}

// 5. Non-regular files.

#[test]
fn a_named_pipe_is_refused_for_every_format() {
    let dir = tempfile::tempdir().unwrap();
    let fifo = dir.path().join("stream.csv");
    let made = Command::new("mkfifo").arg(&fifo).status().unwrap();
    assert!(made.success());
    let expected = format!(
        "{}: is a named pipe (FIFO), expected a regular file (catalogs are read more than once; save the stream to a file first)",
        fifo.display()
    );
    for format in [
        FileFormat::Csv(CsvOptions::default()),
        FileFormat::Parquet,
        FileFormat::Fits { hdu: None },
        FileFormat::Votable { table: 0 },
    ] {
        assert_eq!(drain(open(&fifo, &format, 16)).unwrap_err(), expected);
    }
    let run = fluxloom(&[
        "vet",
        s(&fifo),
        "--schema",
        "demo_catalogs/lantern_nir.toml",
    ]);
    assert_error(&run, &format!("fluxloom: error: {expected}"));
}

#[test]
fn build_refuses_a_named_pipe_before_reading_it() {
    let dir = tempfile::tempdir().unwrap();
    for entry in std::fs::read_dir(repo().join("demo_catalogs/fl1")).unwrap() {
        let entry = entry.unwrap();
        std::fs::copy(entry.path(), dir.path().join(entry.file_name())).unwrap();
    }
    let fifo = dir.path().join("kos.csv");
    std::fs::remove_file(&fifo).unwrap();
    assert!(
        Command::new("mkfifo")
            .arg(&fifo)
            .status()
            .unwrap()
            .success()
    );
    let mut child = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["build", "plan.toml", "--out", "out", "--quiet"])
        .current_dir(dir.path())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let deadline = std::time::Instant::now() + std::time::Duration::from_secs(60);
    while child.try_wait().unwrap().is_none() {
        if std::time::Instant::now() > deadline {
            child.kill().unwrap();
            panic!("build waited on the named pipe");
        }
        std::thread::sleep(std::time::Duration::from_millis(50));
    }
    let out = child.wait_with_output().unwrap();
    let run = Run {
        code: out.status.code().unwrap_or(-1),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    };
    assert_error(
        &run,
        "fluxloom: error: kos.csv: is a named pipe (FIFO), expected a regular file (catalogs are read more than once; save the stream to a file first)",
    );
}

// 6. VOTable features that are refused by name.

fn votable_with(table: &str, data: &str) -> String {
    format!(
        "<?xml version=\"1.0\"?>\n<VOTABLE version=\"1.4\"><RESOURCE>\n<TABLE ID=\"t0\"><FIELD name=\"a\" datatype=\"int\"/><DATA><TABLEDATA><TR><TD>1</TD></TR></TABLEDATA></DATA></TABLE>\n{table}<DATA>{data}</DATA></TABLE>\n</RESOURCE></VOTABLE>\n"
    )
}

#[test]
fn votable_parquet_serialization_and_table_references_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let options = VotableOptions {
        table_index: 1,
        batch_rows: 4,
    };
    let text = votable_with(
        "<TABLE><FIELD name=\"a\" datatype=\"int\"/>",
        "<PARQUET type=\"VOTable-remote-file\"><STREAM href=\"rows.parquet\"/></PARQUET>",
    );
    let path = write(dir.path(), "pq.vot", text.as_bytes());
    assert_eq!(
        drain(read_votable(&path, &options)).unwrap_err(),
        format!(
            "{}: DATA of TABLE 1 is in the PARQUET serialization, expected TABLEDATA, BINARY or BINARY2",
            path.display()
        )
    );
    let text = votable_with(
        "<TABLE ref=\"t0\">",
        "<TABLEDATA><TR><TD>2</TD></TR></TABLEDATA>",
    );
    let path = write(dir.path(), "ref.vot", text.as_bytes());
    assert_eq!(
        drain(read_votable(&path, &options)).unwrap_err(),
        format!(
            "{}: TABLE 1 refers to another table (ref=\"t0\") for its FIELDs, which is not supported; expected a TABLE with its own FIELDs",
            path.display()
        )
    );
}

#[test]
fn gzip_and_utf16_votables_are_named_as_such() {
    let dir = tempfile::tempdir().unwrap();
    let text = fixture("sources_tabledata.vot");
    let path = write(dir.path(), "z.vot", &gzip(&text));
    assert_eq!(
        drain(read_votable(&path, &vot_options())).unwrap_err(),
        format!(
            "{}: is gzip-compressed, expected an uncompressed VOTable (decompress it first)",
            path.display()
        )
    );
    let utf16: Vec<u8> = String::from_utf8(text)
        .unwrap()
        .encode_utf16()
        .flat_map(|u| u.to_le_bytes())
        .collect();
    for (name, bom) in [("bom.vot", &[0xFF, 0xFE][..]), ("plain16.vot", &[][..])] {
        let bytes: Vec<u8> = bom.iter().copied().chain(utf16.iter().copied()).collect();
        let path = write(dir.path(), name, &bytes);
        assert_eq!(
            drain(read_votable(&path, &vot_options())).unwrap_err(),
            format!(
                "{}: is UTF-16 encoded, expected a UTF-8 VOTable (re-encode it as UTF-8)",
                path.display()
            )
        );
    }
}

#[test]
fn a_truncated_votable_end_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let text = fixture("sources_tabledata.vot");
    let end = text
        .windows(12)
        .rposition(|w| w == b"</TABLEDATA>")
        .unwrap()
        + 12;
    let path = write(dir.path(), "cut.vot", &text[..end + 4]);
    let err = drain(read_votable(&path, &vot_options())).unwrap_err();
    assert_eq!(
        err,
        format!(
            "{}: truncated VOTable: the document ends at byte {} with 4 element(s) still open",
            path.display(),
            end + 4
        )
    );
}

// 7. CSV positions: the data row and the file line.

#[test]
fn csv_messages_give_the_data_row_and_the_file_line() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo().join("demo_catalogs/lantern_nir.csv")).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    // Lines 1-2 are comments, line 3 the header; data row 3 is line 6. A
    // comment is added before it, so it becomes line 7.
    lines.insert(5, "# a comment between data rows".to_string());
    lines[6] = "LNS-0003,231.203173,12.392625".to_string();
    let path = write(
        dir.path(),
        "short.csv",
        (lines.join("\n") + "\n").as_bytes(),
    );
    let run = fluxloom(&[
        "vet",
        s(&path),
        "--schema",
        "demo_catalogs/lantern_nir.toml",
    ]);
    assert_error(
        &run,
        &format!(
            "fluxloom: error: {}: row 3 (line 7) has 3 fields, expected 15 as in the header (line 3)",
            path.display()
        ),
    );
}
