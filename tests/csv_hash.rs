//! The SHA-256 of a profile is computed by the scan from the bytes it reads, so that the
//! file is not read a separate time to hash it. Every expected value below was printed by
//! `sha256sum` (GNU coreutils), a general-purpose reference tool, for the same bytes
//! written to a file.

use bankstep::profile::csv::{scan, scan_bytes, scan_source, CsvOptions, CsvSource};
use std::io::Write;

const HEADER: &str = "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n";

fn write(bytes: &[u8]) -> tempfile::NamedTempFile {
    let mut f = tempfile::NamedTempFile::new().expect("temp file");
    f.write_all(bytes).expect("write");
    f.flush().expect("flush");
    f
}

#[test]
fn a_small_profile_hashes_as_sha256sum_does() {
    let text = format!("{HEADER}0,1,1,1,1,1,1\n10,2,2,2,2,2,2\n");
    // sha256sum of these 81 bytes.
    let want = "aeb3cf7dcd68e60086af548fc08a5c8234a61c3ed37388c0169b211ce6519a66";
    let f = write(text.as_bytes());
    let from_file = scan(f.path(), &CsvOptions::default()).unwrap();
    assert_eq!(from_file.sha256, want);
    let from_bytes = scan_bytes("mem.csv", text.into_bytes(), &CsvOptions::default()).unwrap();
    assert_eq!(from_bytes.sha256, want);
}

#[test]
fn the_hash_covers_a_byte_order_mark_crlf_and_blank_lines() {
    // The reader skips the byte-order mark and blank lines, but the hash is of the file
    // exactly as it is, last line without a line end included.
    let text = b"\xef\xbb\xbftime,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\r\n\
                 0,1,1,1,1,1,1\r\n\r\n10,2,2,2,2,2,2";
    // sha256sum of these bytes.
    let want = "0e2fb0323e3ad690b6269b54463fd522810359993b9e177371d99d3fbb217c72";
    let f = write(text);
    let sc = scan(f.path(), &CsvOptions::default()).unwrap();
    assert_eq!(sc.rows_used, 2);
    assert_eq!(sc.sha256, want);
}

#[test]
fn a_profile_longer_than_the_read_buffer_hashes_every_byte_once() {
    // 143 943 bytes, more than two 64 KiB read buffers: rows k = 0 … 4999 of
    // `k,1.5,0.5,1.5,0.5,1.5,0.5`.
    let mut text = HEADER.to_string();
    for k in 0..5000 {
        text.push_str(&format!("{k},1.5,0.5,1.5,0.5,1.5,0.5\n"));
    }
    assert_eq!(text.len(), 143_943);
    // sha256sum of these bytes.
    let want = "705602e34200af3e25aa66299db767833e56011d0e046b4af2777affd848008a";
    let f = write(text.as_bytes());
    assert_eq!(scan(f.path(), &CsvOptions::default()).unwrap().sha256, want);
    // A reader source gives its bytes in other chunks; the hash must not change.
    let data = text.into_bytes();
    let src = CsvSource::reader("gen.csv", move || {
        Ok(Box::new(std::io::Cursor::new(data.clone())) as Box<dyn std::io::Read + Send>)
    });
    assert_eq!(
        scan_source(&src, &CsvOptions::default()).unwrap().sha256,
        want
    );
}
