//! One chunked line reader for the record's fast queries: a file is read in large chunks and
//! handed on as runs of complete lines, so memory stays flat and nothing is allocated per line.

use std::io::Read;
use std::path::Path;

use crate::error::{Error, Result};

/// Chunk size of the record's queries: 8 MiB, large enough that a million-lot trend file is
/// read in a few dozen system calls.
pub const CHUNK: usize = 8 << 20;

/// Reads `path` in chunks of `chunk` bytes and hands `block` each run of complete lines (line
/// feeds included). The last call, at end of file, gets whatever remains, possibly nothing,
/// and its last line may lack a line feed. A line longer than a chunk is carried over until
/// it is complete. An error from `block` stops the reading and is returned.
pub fn for_each_block(
    path: &Path,
    chunk: usize,
    mut block: impl FnMut(&[u8]) -> Result<()>,
) -> Result<()> {
    let mut file = std::fs::File::open(path).map_err(|e| Error::io(path, "reading", e))?;
    let mut buf: Vec<u8> = Vec::with_capacity(chunk + 4096);
    let mut eof = false;
    while !eof {
        let start = buf.len();
        buf.resize(start + chunk, 0);
        let n = file
            .read(&mut buf[start..])
            .map_err(|e| Error::io(path, "reading", e))?;
        buf.truncate(start + n);
        eof = n == 0;
        // Complete lines only; the partial last line waits for the next round.
        let end = if eof {
            buf.len()
        } else {
            memchr::memrchr(b'\n', &buf).map_or(0, |i| i + 1)
        };
        if end == 0 && !eof {
            continue;
        }
        block(&buf[..end])?;
        buf.drain(..end);
    }
    Ok(())
}

/// Reads `path` as [`for_each_block`] does and hands `visit` every line (without its line
/// feed) with its 1-based line number, the header being line 1. A final line feed does not
/// start another line.
pub fn for_each_line(
    path: &Path,
    chunk: usize,
    mut visit: impl FnMut(usize, &[u8]) -> Result<()>,
) -> Result<()> {
    let mut line_no = 0usize;
    for_each_block(path, chunk, |block| {
        let mut pos = 0;
        while pos < block.len() {
            let le = memchr::memchr(b'\n', &block[pos..]).map_or(block.len(), |k| pos + k);
            line_no += 1;
            visit(line_no, &block[pos..le])?;
            pos = le + 1;
        }
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lines_of(text: &[u8], chunk: usize) -> Vec<(usize, Vec<u8>)> {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("f.csv");
        std::fs::write(&p, text).unwrap();
        let mut got = Vec::new();
        for_each_line(&p, chunk, |n, l| {
            got.push((n, l.to_vec()));
            Ok(())
        })
        .unwrap();
        got
    }

    #[test]
    fn every_line_once_whatever_the_chunk() {
        let text = b"head\na,1\n\nlonger line here\nlast";
        for chunk in [1, 3, 8, 1 << 20] {
            let got = lines_of(text, chunk);
            let want: Vec<(usize, Vec<u8>)> = text
                .split(|&b| b == b'\n')
                .enumerate()
                .map(|(i, l)| (i + 1, l.to_vec()))
                .collect();
            assert_eq!(got, want, "chunk {chunk}");
        }
    }

    #[test]
    fn a_final_line_feed_starts_no_line_and_an_empty_file_has_none() {
        assert_eq!(lines_of(b"a\nb\n", 2).len(), 2);
        assert!(lines_of(b"", 4).is_empty());
    }

    #[test]
    fn blocks_hold_complete_lines_and_errors_stop_the_read() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("f.csv");
        std::fs::write(&p, b"one\ntwo\nthree\n").unwrap();
        let mut blocks = Vec::new();
        for_each_block(&p, 5, |b| {
            blocks.push(b.to_vec());
            Ok(())
        })
        .unwrap();
        assert!(blocks.iter().all(|b| b.is_empty() || b.ends_with(b"\n")));
        assert_eq!(blocks.concat(), b"one\ntwo\nthree\n");
        let mut calls = 0;
        let r = for_each_line(&p, 5, |n, _| {
            calls += 1;
            if n == 2 {
                Err(Error::invalid("f.csv:2", "stop", "none"))
            } else {
                Ok(())
            }
        });
        assert!(r.is_err());
        assert_eq!(calls, 2);
    }
}
