//! Reading a large delimited file as a stream: a window of the file at a time, so that the
//! file is never held whole and the reading of the next window (with its fingerprint)
//! overlaps the typing of this one.
//!
//! The stream reader handles the usual file: a header, then data rows whose columns are
//! typed from their first cells. Anything else (an error, a column whose earlier cells
//! must be read again as text, a column that asks for exact residuals, a file that fits in
//! one window) is handed back, and the caller reads the file whole with
//! [`super::read_delimited`]. Its result, errors included, is therefore the one the whole
//! reader gives; the stream reader only ever returns the same data set sooner.

use std::io::{self, Read};

use sha2::{Digest, Sha256};

use super::load::{
    check_open_quote, count_lf, finish_columns, is_break, marker_bytes, parts_of, read_header,
    refused_error, wants_exact, Sink, MAX_LINE_BYTES, PART_BYTES, UTF8_BOM,
};
use super::split::RecordStart;
use super::{hex, DataSet, LoadOptions};

/// Bytes read at a time: a file no larger is read whole. Large enough that a window holds
/// several batches of parts, small enough that two windows are a small share of a large
/// file's memory.
const WINDOW_BYTES: usize = 1 << 23;

/// What [`stream_delimited`] made of a file.
#[derive(Debug)]
pub enum Streamed {
    /// The data set, and the SHA-256 (hex) of every byte of the file.
    Read {
        /// The data set, as [`super::read_delimited`] reads it.
        set: DataSet,
        /// Fingerprint of the file's bytes.
        sha256: String,
    },
    /// The file fits in one window: its bytes, for [`super::read_delimited`].
    Whole(Vec<u8>),
    /// The file needs the whole-file reader: read it again, whole.
    Again,
}

/// Reads delimited text from `reader` a window at a time. `size` is the file's length when
/// known, to keep room for its rows in one go.
pub fn stream_delimited(
    reader: &mut (dyn Read + Send),
    size: Option<u64>,
    opts: &LoadOptions,
) -> io::Result<Streamed> {
    stream_in_windows(reader, size, opts, WINDOW_BYTES, PART_BYTES)
}

/// [`stream_delimited`] with windows of `window` bytes cut into parts of about `part_bytes`.
pub(super) fn stream_in_windows(
    reader: &mut (dyn Read + Send),
    size: Option<u64>,
    opts: &LoadOptions,
    window: usize,
    part_bytes: usize,
) -> io::Result<Streamed> {
    let window = window.max(1);
    // Room for a window, or for the whole file when it is known to be smaller.
    let first = size
        .and_then(|s| usize::try_from(s).ok())
        .map_or(window, |s| s.saturating_add(1).min(window));
    let mut cur = Vec::with_capacity(first + first / 4);
    // A file smaller than its length said (it grew meanwhile) reads on to a whole window.
    if fill(reader, &mut cur, first)? || (first < window && fill(reader, &mut cur, window)?) {
        return Ok(Streamed::Whole(cur));
    }
    // Bytes are fingerprinted in file order, each window's while it is typed.
    let mut hasher = Sha256::new();
    let delimiter = opts.delimiter;
    if delimiter == b'"' || is_break(delimiter) || !delimiter.is_ascii() {
        return Ok(Streamed::Again);
    }
    let markers = marker_bytes(opts);

    // The header must end at a line break inside the window, which grows until it does.
    let mut last = RecordStart { offset: 0, line: 1 };
    let (names, skip, data, mut line) = loop {
        if cur.starts_with(&[0xFF, 0xFE]) || cur.starts_with(&[0xFE, 0xFF]) {
            return Ok(Streamed::Again);
        }
        let skip = if cur.starts_with(UTF8_BOM) {
            UTF8_BOM.len()
        } else {
            0
        };
        let body = cur.get(skip..).unwrap_or_default();
        if let Ok((names, (data, line))) = read_header(body, delimiter, &mut last) {
            let header = body.get(..data).unwrap_or_default();
            if data < body.len() && matches!(header.last(), Some(b'\n' | b'\r')) {
                if memchr::memchr(0, header).is_some() {
                    return Ok(Streamed::Again);
                }
                break (names, skip, data, line);
            }
        }
        if cur.len() > MAX_LINE_BYTES {
            return Ok(Streamed::Again);
        }
        let before = cur.len();
        if fill(reader, &mut cur, before.saturating_add(window))? {
            return Ok(Streamed::Whole(cur));
        }
    };
    // A column with no name is left out or refused by what all its cells hold: the whole
    // reader decides.
    if names.iter().any(String::is_empty) {
        return Ok(Streamed::Again);
    }
    hasher.update(cur.get(..skip + data).unwrap_or_default());
    cur.drain(..skip + data);

    // Room for the rows the file's size suggests, at the first window's bytes per row; a
    // column that outgrows it is moved, not copied, by the allocator at these sizes.
    let per_row = cur.len() / count_lf(&cur).max(1);
    let estimate = size
        .and_then(|s| usize::try_from(s).ok())
        .map_or(0, |s| s / per_row.max(1));
    let mut sink = Sink::new(names, estimate.saturating_add(estimate / 32));

    let mut next: Vec<u8> = Vec::with_capacity(cur.capacity());
    let mut eof = false;
    // The latest record and every byte after it, for the check of a quote left open.
    let mut tail: Vec<u8> = Vec::new();
    let mut tail_line = last.line;
    // Where the bytes of `cur` not yet fingerprinted start (the carried bytes were, with
    // the window they came from).
    let mut fresh = 0;
    loop {
        let mut parts = parts_of(&cur, 0, line, delimiter, part_bytes);
        // The last part may end inside a record unless the file ends with it.
        let keep = if eof {
            parts.len()
        } else {
            parts.len().saturating_sub(1)
        };
        let Some(cut) = (if eof {
            Some(cur.len())
        } else {
            parts.get(keep).map(|p| p.start)
        }) else {
            return Ok(Streamed::Again);
        };
        if !eof && (keep == 0 || cut == 0) {
            // No record ends in the window: read more into it.
            let before = cur.len();
            eof = fill(reader, &mut cur, before.saturating_add(window))?;
            continue;
        }
        let next_line = parts.get(keep).map_or(line, |p| p.line);
        parts.truncate(keep);
        let done = cur.get(..cut).unwrap_or_default();
        if memchr::memchr(0, done).is_some() {
            return Ok(Streamed::Again);
        }
        next.clear();
        next.extend_from_slice(cur.get(cut..).unwrap_or_default());
        // Where the window's latest record starts; the offset stays out of range when the
        // window has none.
        let mut at = RecordStart {
            offset: usize::MAX,
            line: 0,
        };
        let unhashed = cur.get(fresh..).unwrap_or_default();
        let (taken, filled) = if eof {
            hasher.update(unhashed);
            let taken = sink.take(
                done,
                parts,
                delimiter,
                &markers,
                &mut at,
                opts.decimal_comma,
            );
            (taken, Ok(true))
        } else {
            rayon::join(
                || {
                    sink.take(
                        done,
                        parts,
                        delimiter,
                        &markers,
                        &mut at,
                        opts.decimal_comma,
                    )
                },
                || {
                    hasher.update(unhashed);
                    let before = next.len();
                    fill(reader, &mut next, before.saturating_add(window))
                },
            )
        };
        if taken.is_err() {
            return Ok(Streamed::Again);
        }
        let now_eof = filled?;
        match done.get(at.offset..) {
            Some(record) => {
                tail.clear();
                tail.extend_from_slice(record);
                tail_line = at.line;
            }
            None => tail.extend_from_slice(done),
        }
        if eof {
            break;
        }
        fresh = cur.len() - cut;
        std::mem::swap(&mut cur, &mut next);
        line = next_line;
        eof = now_eof;
    }

    if sink.row_numbers.is_empty()
        || (memchr::memchr(b'"', &tail).is_some()
            && check_open_quote(&tail, tail_line, delimiter).is_err())
        || refused_error(&sink.columns, &sink.names).is_some()
        || !sink.refills.is_empty()
        || wants_exact(&sink.columns)
    {
        return Ok(Streamed::Again);
    }
    let Sink {
        names,
        columns,
        row_numbers,
        ..
    } = sink;
    Ok(Streamed::Read {
        set: DataSet {
            name: opts.name.clone(),
            columns: finish_columns(names, columns),
            row_numbers: row_numbers.finish(),
            rows_are: super::RowOrigin::FileLines,
            label: None,
        },
        sha256: hex(&hasher.finalize()),
    })
}

/// Reads from `reader` until `buf` holds `upto` bytes or the reader ends; true when it ended
/// (fewer bytes than asked for).
fn fill(reader: &mut (dyn Read + Send), buf: &mut Vec<u8>, upto: usize) -> io::Result<bool> {
    let want = upto.saturating_sub(buf.len());
    buf.reserve(want);
    let got = Read::take(&mut *reader, want as u64).read_to_end(buf)?;
    Ok(got < want)
}
