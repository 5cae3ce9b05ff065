//! Reading a large delimited file on several threads, with the sequential result.
//!
//! Parsing the text (the CSV state machine, number parsing, level interning) is most of
//! the time `analyze` spends on a million-row file, and it is one pass over bytes that
//! can be cut into pieces. When no field is quoted, every line end ends a record, so the
//! body can be split at line ends into ranges that are read independently, each by its
//! own CSV reader into its own [`RowSink`], with line numbers offset by the line ends
//! before the range. The parts are then merged in file order ([`RowSink::absorb`]).
//!
//! The result must not depend on the split: the same observations, lines, dropped rows,
//! level codes and order, and the same error. So the first error in file order wins:
//! parts are inspected in order and the first part with a problem decides it, whether
//! the problem is its own (a bad number, a ragged row, an id repeated within the part)
//! or an id that an earlier part already holds ([`RowSink::first_repeat`]; such a row
//! always precedes the part's own error, because a part stops at its first error and
//! has only recorded the ids of rows before it). Files with a quote character anywhere
//! (a quoted field may hold a line end) and small files take the sequential path.

use super::rows::RowSink;
use super::{reader_over, text, Columns, Observations, Ranges};
use crate::error::{Error, Result};
use rayon::prelude::*;

/// Bodies shorter than this are read sequentially: below about a megabyte (some 40 000
/// rows) the work per range is too small for the threads to pay.
pub const MIN_BYTES: usize = 1 << 20;

/// When and into how many ranges to split the body.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Split {
    /// Smallest body (bytes after the byte-order mark) read in parallel.
    pub min_bytes: usize,
    /// Number of ranges (1: always sequential).
    pub ranges: usize,
}

impl Split {
    /// The default: [`MIN_BYTES`], one range per thread of the current rayon pool.
    pub fn for_pool() -> Split {
        Split { min_bytes: MIN_BYTES, ranges: rayon::current_num_threads() }
    }

    /// Start offsets (in `body`) of the ranges after the first, or `None` for the
    /// sequential path. Range 0 starts at the body's start and holds the header, which
    /// ends before `header_end`; every other range starts right after a line feed.
    pub fn bounds(&self, body: &[u8], header_end: usize, has_quotes: bool) -> Option<Vec<usize>> {
        if has_quotes || self.ranges < 2 || body.len() < self.min_bytes || header_end >= body.len() {
            return None;
        }
        let rest = body.len() - header_end;
        let mut bounds: Vec<usize> = Vec::with_capacity(self.ranges - 1);
        for k in 1..self.ranges {
            let target = header_end + rest * k / self.ranges;
            let from = target.max(bounds.last().copied().unwrap_or(0));
            let Some(nl) = body[from..].iter().position(|&b| b == b'\n') else {
                break;
            };
            let mut at = from + nl + 1;
            // The CSV reader skips a byte-order mark at the start of its text: a range
            // must not start at a line that begins with one (a stray mark mid-file).
            while body[at..].starts_with(&[0xEF, 0xBB, 0xBF]) {
                match body[at..].iter().position(|&b| b == b'\n') {
                    Some(nl) => at += nl + 1,
                    None => at = body.len(),
                }
            }
            if at >= body.len() {
                break;
            }
            if bounds.last() != Some(&at) {
                bounds.push(at);
            }
        }
        (!bounds.is_empty()).then_some(bounds)
    }
}

/// Reads the body in the ranges starting at 0 and at each of `bounds`, in parallel, and
/// merges them in file order (see the module documentation).
///
/// # Errors
/// The first input error in file order, as the sequential reader reports it.
pub(super) fn parse_ranges(
    ctx: &Ranges<'_>,
    columns: &Columns,
    body: &[u8],
    bounds: &[usize],
    source: &str,
) -> Result<Observations> {
    let starts: Vec<usize> = std::iter::once(0).chain(bounds.iter().copied()).collect();
    let ends: Vec<usize> = bounds.iter().copied().chain(std::iter::once(body.len())).collect();
    let pieces: Vec<&[u8]> = starts.iter().zip(&ends).map(|(&s, &e)| &body[s..e]).collect();
    // Line ends before each range: a prefix sum of the line ends within the ranges.
    let counts: Vec<u64> = pieces.par_iter().map(|p| p.iter().filter(|&&b| b == b'\n').count() as u64).collect();
    let lines_before: Vec<u64> = counts
        .iter()
        .scan(0u64, |acc, &c| {
            let before = *acc;
            *acc += c;
            Some(before)
        })
        .collect();

    let total_lines: u64 = counts.iter().sum();
    let parts: Vec<(RowSink<'_>, Option<Error>)> = pieces
        .par_iter()
        .zip(&lines_before)
        .enumerate()
        .map(|(k, (&piece, &before))| {
            let new_sink = || {
                let mut sink = RowSink::new(ctx.spec);
                // The first part will take in all the others.
                sink.reserve(if k == 0 { total_lines } else { counts[k] } as usize + 1);
                sink
            };
            let mut sink = new_sink();
            let mut reader = reader_over(piece, ctx.delimiter);
            let mut record = csv::ByteRecord::new();
            // The body of a part: after the header in the first. Rows are read without
            // the CSV reader where the text allows (`Ranges::read_plain_rows`).
            let plain = (|| {
                let body = if k == 0 {
                    ctx.read_header(&mut reader, &mut record)?;
                    reader.position().byte() as usize
                } else {
                    0
                };
                let first_line = 1 + before + piece[..body].iter().filter(|&&b| b == b'\n').count() as u64;
                match std::str::from_utf8(&piece[body..]) {
                    Ok(text) => ctx.read_plain_rows(text, first_line, columns, &mut sink),
                    Err(_) => Ok(false),
                }
            })();
            let read = match plain {
                Ok(true) => Ok(()),
                Err(e) => Err(e),
                Ok(false) => {
                    sink = new_sink();
                    let mut reader = reader_over(piece, ctx.delimiter);
                    let mut lines = text::LineCounter::new(piece, 1 + before);
                    (|| {
                        if k == 0 {
                            ctx.read_header(&mut reader, &mut record)?;
                            lines.line_at(super::record_byte(&record));
                        }
                        ctx.read_rows(&mut reader, &mut record, &mut lines, before, columns, &mut sink)
                    })()
                }
            };
            (sink, read.err())
        })
        .collect();

    let repeats: Vec<Option<Error>> = (0..parts.len())
        .into_par_iter()
        .map(|k| {
            let earlier: Vec<&RowSink<'_>> = parts[..k].iter().map(|(s, _)| s).collect();
            parts[k].0.first_repeat(&earlier, ctx.loc)
        })
        .collect();

    let mut merged: Option<RowSink<'_>> = None;
    for ((sink, error), repeat) in parts.into_iter().zip(repeats) {
        if let Some(e) = repeat.or(error) {
            return Err(e);
        }
        match merged.as_mut() {
            None => merged = Some(sink),
            Some(m) => m.absorb(sink),
        }
    }
    match merged {
        Some(sink) => sink.finish(source, ctx.loc, ctx.delimiter),
        None => Err(Error::internal("parallel reading produced no parts")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::{DataSpec, Source};
    use crate::data::parse_split;
    use crate::error::Location;
    use proptest::prelude::*;

    const SEQUENTIAL: Split = Split { min_bytes: 0, ranges: 1 };

    fn spec(id: bool) -> DataSpec {
        let mut s = DataSpec::new(Source::Stdin, "y", &["a", "b"]);
        if id {
            s.id = Some("pid".into());
        }
        s
    }

    fn read(text: &[u8], spec: &DataSpec, split: Split) -> Result<Observations> {
        parse_split(text, spec, "t.csv", &Location::file("t.csv"), split)
    }

    /// Everything a reader produces, as one comparable string (values by their bits).
    fn summary(r: &Result<Observations>) -> String {
        match r {
            Err(e) => format!("error exit {}: {e:?}", e.exit_code()),
            Ok(o) => {
                let y: Vec<u64> = o.y.iter().map(|v| v.to_bits()).collect();
                let factors: Vec<_> = o.factors.iter().map(|f| (&f.name, &f.labels, &f.first_line, &f.codes)).collect();
                format!(
                    "y {y:?} at {} lines {:?} read {} dropped {:?} factors {factors:?} delim {} outcome {} source {}",
                    o.location.to_bits(),
                    o.lines,
                    o.rows_read,
                    o.dropped,
                    o.delimiter,
                    o.outcome,
                    o.source
                )
            }
        }
    }

    /// Checks that every number of ranges from 2 to 9 gives the sequential result.
    fn same_for_every_split(text: &[u8], spec: &DataSpec) -> String {
        let expected = summary(&read(text, spec, SEQUENTIAL));
        for ranges in 2..=9 {
            let got = summary(&read(text, spec, Split { min_bytes: 0, ranges }));
            assert_eq!(got, expected, "{ranges} ranges on\n{}", String::from_utf8_lossy(text));
        }
        expected
    }

    /// Invented rows of a 3 × 2 design: `pid,y,a,b` with line ends `eol`.
    fn rows(n: usize, eol: &str) -> Vec<String> {
        let mut out = vec![format!("pid,y,a,b{eol}")];
        for i in 0..n {
            out.push(format!(
                "{i},{}.{},{},{}{eol}",
                10 + i % 7,
                i % 10,
                ["lo", "mid", "hi"][i % 3],
                ["p", "q"][i / 3 % 2]
            ));
        }
        out
    }

    #[test]
    fn bounds_fall_after_line_feeds_and_skip_quoted_or_small_bodies() {
        let body = rows(50, "\r\n").concat();
        let body = body.as_bytes();
        let split = Split { min_bytes: 0, ranges: 4 };
        let bounds = split.bounds(body, 10, false).unwrap();
        assert_eq!(bounds.len(), 3);
        assert!(bounds.windows(2).all(|w| w[0] < w[1]));
        assert!(bounds.iter().all(|&b| body[b - 1] == b'\n' && b > 10));
        assert!(split.bounds(body, 10, true).is_none());
        assert!(Split { min_bytes: body.len() + 1, ranges: 4 }.bounds(body, 10, false).is_none());
        assert!(Split { min_bytes: 0, ranges: 1 }.bounds(body, 10, false).is_none());
        // A body without a further line feed stays in one range.
        assert!(split.bounds(b"y,a,b\n1,x,y", 6, false).is_none());
    }

    #[test]
    fn clean_files_read_the_same_in_any_number_of_ranges() {
        for eol in ["\n", "\r\n"] {
            let text = rows(60, eol).concat();
            let s = same_for_every_split(text.as_bytes(), &spec(true));
            assert!(s.starts_with("y "), "{s}");
            let bom = format!("\u{feff}\n\n{text}");
            same_for_every_split(bom.as_bytes(), &spec(false));
            // No line end after the last row.
            same_for_every_split(text.trim_end().as_bytes(), &spec(true));
        }
    }

    #[test]
    fn an_error_in_any_range_is_found_at_its_line() {
        let base = rows(40, "\n");
        for at in 1..base.len() {
            for bad in ["7;5", "abc", "1e400", "inf"] {
                let mut r = base.clone();
                r[at] = format!("{at},{bad},lo,p\n");
                let s = same_for_every_split(r.concat().as_bytes(), &spec(true));
                assert!(s.contains(&format!("line: Some({})", at + 1)), "{s}");
            }
            let mut r = base.clone();
            r[at] = format!("{at},1,lo,p,extra\n");
            let s = same_for_every_split(r.concat().as_bytes(), &spec(true));
            assert!(s.contains("5 fields"), "{s}");
        }
    }

    #[test]
    fn the_earlier_of_two_errors_wins() {
        let base = rows(30, "\n");
        for first in 1..base.len() {
            for second in first + 1..base.len() {
                let mut r = base.clone();
                r[first] = format!("{first},1,lo,p,extra\n");
                r[second] = format!("{second},oops,lo,p\n");
                let s = same_for_every_split(r.concat().as_bytes(), &spec(false));
                assert!(s.contains(&format!("line: Some({})", first + 1)), "{s}");
                let mut r = base.clone();
                r[first] = format!("{first},oops,lo,p\n");
                r[second] = format!("{second},1,lo,p,extra\n");
                same_for_every_split(r.concat().as_bytes(), &spec(false));
            }
        }
    }

    #[test]
    fn repeated_ids_across_ranges_name_both_lines() {
        let base = rows(30, "\n");
        for first in 1..base.len() {
            for second in first + 1..base.len() {
                let mut r = base.clone();
                r[second] = format!("{},3.5,mid,q\n", first - 1);
                let s = same_for_every_split(r.concat().as_bytes(), &spec(true));
                assert!(s.contains(&format!("line: Some({})", second + 1)), "{s}");
                assert!(s.contains(&format!("also appears at line {}", first + 1)), "{s}");
                // A repeated id before a bad number wins; after it, the number does.
                let mut r2 = r.clone();
                if second + 1 < r2.len() {
                    r2[second + 1] = "x,bad,lo,p\n".into();
                    let s = same_for_every_split(r2.concat().as_bytes(), &spec(true));
                    assert!(s.contains("also appears"), "{s}");
                }
                r[first] = format!("{first},bad,lo,p\n");
                same_for_every_split(r.concat().as_bytes(), &spec(true));
            }
        }
    }

    #[test]
    fn blank_lines_crlf_and_missing_values_at_every_boundary() {
        let base = rows(30, "\r\n");
        for at in 1..base.len() {
            for extra in ["\r\n", "\n", "  \r\n", "\r\n\r\n", " , , , \n"] {
                let mut r = base.clone();
                r.insert(at, extra.to_string());
                same_for_every_split(r.concat().as_bytes(), &spec(true));
            }
            for missing in ["{at},NA,lo,p\r\n", "{at},1,,p\r\n", "{at},1,lo,NA\r\n", "{at},1,new,\r\n", "NA,1,lo,p\r\n"]
            {
                let mut r = base.clone();
                r[at] = missing.replace("{at}", &at.to_string());
                let s = same_for_every_split(r.concat().as_bytes(), &spec(true));
                // A missing id is no reason to drop the row.
                assert_eq!(s.contains("dropped [Dropped"), !missing.starts_with("NA"), "{s}");
            }
        }
    }

    #[test]
    fn thread_count_does_not_change_the_result() {
        let mut r = rows(200, "\n");
        r[57] = "56,NA,lo,p\n".into();
        r[120] = "\n".into();
        r[150] = "149,3,new,q\n".into();
        let text = r.concat();
        let mut bad = r.clone();
        bad[170] = "5,1,lo,p\n".into();
        let bad = bad.concat();
        for t in [text.as_bytes(), bad.as_bytes()] {
            let expected = summary(&read(t, &spec(true), SEQUENTIAL));
            for threads in [1, 8] {
                let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
                let got = pool.install(|| {
                    let pooled = Split { min_bytes: 0, ..Split::for_pool() };
                    assert_eq!(pooled.ranges, threads);
                    [pooled, Split { min_bytes: 0, ranges: 8 }].map(|s| summary(&read(t, &spec(true), s)))
                });
                assert_eq!(got, [expected.clone(), expected.clone()], "{threads} threads");
            }
        }
    }

    #[test]
    fn plain_rows_read_as_the_csv_reader_reads_them() {
        // Semicolon- and tab-delimited text (the plain reader cuts at the delimiter found),
        // stray carriage returns, blank and ragged rows at every position.
        for (delim, decimal) in [(";", ","), ("\t", ".")] {
            let base: Vec<String> = std::iter::once(format!("pid{delim}y{delim}a{delim}b\r\n"))
                .chain((0..40).map(|i| {
                    format!(
                        "{i}{delim}{}{decimal}{}{delim}{}{delim}{}\r\n",
                        10 + i % 7,
                        i % 10,
                        ["lo", "mid"][i % 2],
                        ["p", "q"][i / 2 % 2]
                    )
                }))
                .collect();
            for at in 1..base.len() {
                for odd in ["\r", "\r\r\n", " \r\n", "1\r2\n", "x\n", "\u{feff}\n"] {
                    let mut r = base.clone();
                    r.insert(at, odd.replace(' ', delim));
                    let mut spec = spec(true);
                    spec.decimal_comma = decimal == ",";
                    same_for_every_split(r.concat().as_bytes(), &spec);
                }
            }
        }
    }

    /// One generated line of a `pid,y,a,b` file.
    fn line_strategy() -> impl Strategy<Value = String> {
        let value = prop_oneof![
            4 => (0u32..2000).prop_map(|v| format!("{}.{}", v / 10, v % 10)),
            1 => Just("NA".to_string()),
            1 => Just(String::new()),
            1 => Just("1,5".to_string()),
            1 => Just("x".to_string()),
        ];
        let label = prop_oneof![Just("lo"), Just("hi"), Just("mid"), Just(""), Just("NA"), Just("z z"), Just("é")];
        // A lone carriage return ends a record for the CSV reader, as a line feed does.
        let eol = prop_oneof![6 => Just("\n"), 2 => Just("\r\n"), 1 => Just("\r"), 1 => Just("\r\r\n")];
        prop_oneof![
            12 => (0u32..60, value, label.clone(), label, eol.clone()).prop_map(|(id, v, a, b, e)| format!("{id},{v},{a},{b}{e}")),
            1 => eol.clone().prop_map(str::to_string),
            1 => eol.clone().prop_map(|e| format!(" \t{e}")),
            1 => eol.clone().prop_map(|e| format!(",,,{e}")),
            1 => eol.clone().prop_map(|e| format!("7,1.5,lo\rhi,p{e}")),
            1 => eol.clone().prop_map(|e| format!("1,2,lo{e}")),
            1 => eol.clone().prop_map(|e| format!("\u{feff}{e}")),
            1 => eol.prop_map(|e| format!("1,2,lo,p,q{e}")),
        ]
    }

    proptest! {
        #[test]
        fn generated_files_read_the_same_split_or_not(
            lines in proptest::collection::vec(line_strategy(), 0..60),
            with_id in any::<bool>(),
            bom in any::<bool>(),
            crlf_header in any::<bool>(),
            final_eol in any::<bool>(),
        ) {
            let mut text = String::new();
            if bom {
                text.push('\u{feff}');
            }
            text.push_str(if crlf_header { "pid,y,a,b\r\n" } else { "pid,y,a,b\n" });
            text.extend(lines);
            if !final_eol {
                while text.ends_with(['\r', '\n']) {
                    text.pop();
                }
            }
            let spec = spec(with_id);
            let expected = summary(&read(text.as_bytes(), &spec, SEQUENTIAL));
            for ranges in [2, 3, 7] {
                let got = summary(&read(text.as_bytes(), &spec, Split { min_bytes: 0, ranges }));
                prop_assert_eq!(&got, &expected);
            }
        }
    }
}
