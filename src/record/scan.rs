//! Parallel line scan of a trend file for read-only queries: the body (after the header) is
//! split at line starts into one byte range per core, each range is read in chunks by its own
//! thread, and the parts come back in file order with their line counts, so line numbers stay
//! exact. Also the lot-id hash that the scan and the lookup index share.

use std::fs::File;
use std::os::unix::fs::FileExt;
use std::path::Path;

use crate::error::{Error, Result};

/// Chunk each part reads at a time: 4 MiB keeps memory flat (one chunk per thread).
pub const PART_CHUNK: usize = 4 << 20;

/// Bodies smaller than this are scanned on the calling thread: starting threads would cost
/// more than it saves on a demo-sized file.
const PARALLEL_FROM: u64 = 2 << 20;

/// 64-bit hash of a lot id: FxHash (the multiply-rotate hash of the Rust compiler, `rustc-hash`:
/// per 8-byte word `h = (h.rotl(5) ^ w) * 0x517c_c1b7_2722_0a95`), then the length folded in
/// the same way. Deterministic across runs and machines, so the lookup index can store it.
/// It only groups ids: equal hashes are always confirmed by comparing the ids themselves.
///
/// Source: rustc-hash crate documentation and source (FxHasher), from memory.
pub fn lot_hash(id: &[u8]) -> u64 {
    const K: u64 = 0x517c_c1b7_2722_0a95;
    let step = |h: u64, w: u64| (h.rotate_left(5) ^ w).wrapping_mul(K);
    let mut h = 0u64;
    let mut words = id.chunks_exact(8);
    for w in &mut words {
        h = step(h, u64::from_le_bytes(w.try_into().expect("8 bytes")));
    }
    let rest = words.remainder();
    if !rest.is_empty() {
        let mut last = [0u8; 8];
        last[..rest.len()].copy_from_slice(rest);
        h = step(h, u64::from_le_bytes(last));
    }
    step(h, id.len() as u64)
}

/// A problem on one line of a part, before the part's first line number is known.
#[derive(Debug, Clone, PartialEq)]
pub struct LineFault {
    /// Line within the part (1-based).
    pub local_line: usize,
    /// What is wrong.
    pub problem: String,
}

/// One part's result: the state its visitor built, and how many lines it held.
#[derive(Debug)]
pub struct Part<T> {
    /// What the visitor built.
    pub state: T,
    /// Number of lines in the part (empty lines included).
    pub lines: usize,
}

/// Byte offset just after the header line (0 when the file has no line feed).
pub fn body_start(file: &File, path: &Path) -> Result<u64> {
    let mut buf = vec![0u8; 64 << 10];
    let mut at = 0u64;
    loop {
        let n = file
            .read_at(&mut buf, at)
            .map_err(|e| Error::io(path, "reading", e))?;
        if n == 0 {
            return Ok(at);
        }
        if let Some(i) = memchr::memchr(b'\n', &buf[..n]) {
            return Ok(at + i as u64 + 1);
        }
        at += n as u64;
    }
}

/// The first line start at or after `at` (a line starts after a line feed), or `end`.
fn next_line_start(file: &File, path: &Path, at: u64, end: u64) -> Result<u64> {
    let mut buf = vec![0u8; 64 << 10];
    let mut pos = at - 1; // the byte before `at` may itself be the line feed
    while pos < end {
        let n = file
            .read_at(&mut buf, pos)
            .map_err(|e| Error::io(path, "reading", e))?;
        if n == 0 {
            break;
        }
        if let Some(i) = memchr::memchr(b'\n', &buf[..n]) {
            return Ok((pos + i as u64 + 1).min(end));
        }
        pos += n as u64;
    }
    Ok(end)
}

/// Splits `[start, end)` into at most `parts` ranges that begin at line starts.
pub fn split_ranges(
    file: &File,
    path: &Path,
    start: u64,
    end: u64,
    parts: usize,
) -> Result<Vec<(u64, u64)>> {
    let parts = parts.max(1) as u64;
    let mut cuts = vec![start];
    for k in 1..parts {
        let guess = start + (end - start) * k / parts;
        let cut = if guess <= start {
            start
        } else {
            next_line_start(file, path, guess, end)?
        };
        if cut > *cuts.last().expect("non-empty") {
            cuts.push(cut);
        }
    }
    if end > *cuts.last().expect("non-empty") || cuts.len() == 1 {
        cuts.push(end);
    }
    Ok(cuts.windows(2).map(|w| (w[0], w[1])).collect())
}

/// Reads `[start, end)` of `file` in chunks of `chunk` bytes and hands `visit` each line
/// (without its line feed) with its 1-based number within the range and its byte offset in
/// the file. A final line feed
/// starts no line. Returns the number of lines.
pub fn lines_in_range(
    file: &File,
    path: &Path,
    (start, end): (u64, u64),
    chunk: usize,
    mut visit: impl FnMut(usize, u64, &[u8]) -> std::result::Result<(), LineFault>,
) -> Result<std::result::Result<usize, LineFault>> {
    let mut buf: Vec<u8> = Vec::with_capacity(chunk + 4096);
    let mut at = start;
    let mut line = 0usize;
    while at < end || !buf.is_empty() {
        let kept = buf.len();
        let buf_at = at - kept as u64; // file offset of buf[0]
        let want = chunk.min((end - at) as usize);
        buf.resize(kept + want, 0);
        let mut got = 0;
        while got < want {
            let n = file
                .read_at(&mut buf[kept + got..kept + want], at + got as u64)
                .map_err(|e| Error::io(path, "reading", e))?;
            if n == 0 {
                break;
            }
            got += n;
        }
        buf.truncate(kept + got);
        at += got as u64;
        let eof = at >= end || got == 0;
        let complete = if eof {
            buf.len()
        } else {
            memchr::memrchr(b'\n', &buf).map_or(0, |i| i + 1)
        };
        let mut pos = 0;
        while pos < complete {
            let le = memchr::memchr(b'\n', &buf[pos..complete]).map_or(complete, |k| pos + k);
            line += 1;
            if let Err(f) = visit(line, buf_at + pos as u64, &buf[pos..le]) {
                return Ok(Err(f));
            }
            pos = le + 1;
        }
        buf.drain(..complete);
        if eof {
            break;
        }
    }
    Ok(Ok(line))
}

/// Scans the body of the file at `path` (everything after the header line) in parallel: one
/// range per core for a large file, one for a small one. `init(k)` makes part `k`'s state and
/// `visit(state, line_in_part, offset, line)` fills it. Parts come back in file order. A fault is
/// returned as an error naming the file and its line number in the file (header = line 1),
/// the earliest one when several parts fail.
pub fn parallel_body<T, I, V>(path: &Path, init: I, visit: V) -> Result<Vec<Part<T>>>
where
    T: Send,
    I: Fn(usize) -> T + Sync,
    V: Fn(&mut T, usize, u64, &[u8]) -> std::result::Result<(), LineFault> + Sync,
{
    parallel_body_in(path, None, init, visit)
}

/// [`parallel_body`] with the number of parts fixed (tests split small files this way).
pub(crate) fn parallel_body_in<T, I, V>(
    path: &Path,
    parts: Option<usize>,
    init: I,
    visit: V,
) -> Result<Vec<Part<T>>>
where
    T: Send,
    I: Fn(usize) -> T + Sync,
    V: Fn(&mut T, usize, u64, &[u8]) -> std::result::Result<(), LineFault> + Sync,
{
    let file = File::open(path).map_err(|e| Error::io(path, "reading", e))?;
    let len = file
        .metadata()
        .map_err(|e| Error::io(path, "reading", e))?
        .len();
    let start = body_start(&file, path)?;
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get().min(8));
    let parts = parts.unwrap_or(if len - start < PARALLEL_FROM {
        1
    } else {
        cores
    });
    let ranges = split_ranges(&file, path, start, len, parts)?;
    let run = |k: usize, range: (u64, u64)| {
        let mut state = init(k);
        let r = lines_in_range(&file, path, range, PART_CHUNK, |n, o, l| {
            visit(&mut state, n, o, l)
        });
        r.map(|r| r.map(|lines| Part { state, lines }))
    };
    let results: Vec<Result<std::result::Result<Part<T>, LineFault>>> = if ranges.len() == 1 {
        vec![run(0, ranges[0])]
    } else {
        std::thread::scope(|s| {
            let handles: Vec<_> = ranges
                .iter()
                .enumerate()
                .map(|(k, &range)| {
                    let run = &run;
                    s.spawn(move || run(k, range))
                })
                .collect();
            handles
                .into_iter()
                .map(|h| h.join().expect("scan thread panicked"))
                .collect()
        })
    };
    let mut out = Vec::with_capacity(results.len());
    let mut lines_before = 1usize; // the header
    for r in results {
        match r? {
            Ok(part) => {
                lines_before += part.lines;
                out.push(part);
            }
            Err(f) => {
                return Err(Error::invalid(
                    format!("{}:{}", path.display(), lines_before + f.local_line),
                    f.problem,
                    "Check the trend file with `resinlot verify`.",
                ))
            }
        }
    }
    if out.is_empty() {
        out.push(Part {
            state: init(0),
            lines: 0,
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lines_by_parts(text: &[u8], parts: usize, chunk: usize) -> Vec<Vec<u8>> {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("f.csv");
        std::fs::write(&p, text).unwrap();
        let f = File::open(&p).unwrap();
        let start = body_start(&f, &p).unwrap();
        let ranges = split_ranges(&f, &p, start, text.len() as u64, parts).unwrap();
        let mut got = Vec::new();
        for r in ranges {
            let n = lines_in_range(&f, &p, r, chunk, |_, o, l| {
                let o = o as usize;
                assert_eq!(&text[o..o + l.len()], l, "offset of {l:?}");
                got.push(l.to_vec());
                Ok(())
            })
            .unwrap()
            .unwrap();
            assert_eq!(n == 0, r.0 == r.1, "only an empty range holds no line");
        }
        got
    }

    /// First principles: however the body is split and chunked, every line after the header
    /// comes back once, in order.
    #[test]
    fn every_body_line_once_whatever_the_split() {
        let text = b"head\na,1\n\nlonger line here\nb\nlast";
        let want: Vec<Vec<u8>> = text
            .split(|&b| b == b'\n')
            .skip(1)
            .map(<[u8]>::to_vec)
            .collect();
        for parts in [1, 2, 3, 7] {
            for chunk in [1, 2, 5, 1 << 20] {
                assert_eq!(
                    lines_by_parts(text, parts, chunk),
                    want,
                    "parts {parts} chunk {chunk}"
                );
            }
        }
        assert!(lines_by_parts(b"head\n", 2, 4).is_empty());
    }

    #[test]
    fn faults_name_the_line_in_the_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("f.csv");
        std::fs::write(&p, b"head\nok\nbad\nok\n").unwrap();
        let e = parallel_body(
            &p,
            |_| (),
            |_, n, _, l| {
                if l == b"bad" {
                    Err(LineFault {
                        local_line: n,
                        problem: "bad line".into(),
                    })
                } else {
                    Ok(())
                }
            },
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("f.csv:3"), "{e}");
        for parts in [1, 2, 3] {
            let e = parallel_body_in(
                &p,
                Some(parts),
                |_| (),
                |_, n, _, l| match l {
                    b"bad" => Err(LineFault {
                        local_line: n,
                        problem: "bad line".into(),
                    }),
                    _ => Ok(()),
                },
            )
            .unwrap_err()
            .to_string();
            assert!(e.contains("f.csv:3"), "parts {parts}: {e}");
        }
        let parts = parallel_body(
            &p,
            |_| 0usize,
            |c, _, _, _| {
                *c += 1;
                Ok(())
            },
        )
        .unwrap();
        assert_eq!(parts.iter().map(|p| p.state).sum::<usize>(), 3);
    }

    #[test]
    fn lot_hash_is_stable_and_separates_near_ids() {
        // Fixed values: the lookup index stores these hashes, so they must never change.
        assert_eq!(lot_hash(b""), 0);
        assert_eq!(lot_hash(b"B0500000"), lot_hash(b"B0500000"));
        assert_ne!(lot_hash(b"B0500000"), lot_hash(b"B0500001"));
        assert_ne!(lot_hash(b"A1"), lot_hash(b"A1\0"));
        assert_ne!(lot_hash(b"PD-2000-0001"), lot_hash(b"PD-2000-0002"));
    }
}
