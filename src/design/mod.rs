//! The factorial design: factors, level order, cells, terms and the row→cell map.
//!
//! A [`Design`] is built once from the [`Observations`] and never printed from here.
//! Cells are ordered row-major with the last factor varying fastest (METHODS §0);
//! observations are stored in the canonical observation order (sorted by cell, input
//! order kept within a cell), so cell `c` is the contiguous slice
//! `cell_range(c)` and every index-based operation (permutations, bootstrap draws)
//! refers to this order. Level order follows DESIGN.md: numeric when every label is a
//! number, else Unicode code-point order, unless `--levels` says otherwise; labels that
//! differ only by case, surrounding spaces or numeric spelling are an input error.

pub mod forms;
pub mod kron;

use crate::config::DataSpec;
use crate::data::{FactorColumn, Observations};
use crate::error::{Error, Location, Result};
use std::collections::HashMap;
use std::sync::OnceLock;

/// The largest number of cells quorum accepts (checked before any allocation).
pub const MAX_CELLS: usize = 10_000;

/// A factor and its ordered levels.
#[derive(Debug, Clone, PartialEq)]
pub struct Factor {
    /// Column name.
    pub name: String,
    /// Level labels in analysis order.
    pub levels: Vec<String>,
    /// Measured (e.g. age group) rather than manipulated; used by generalized η².
    pub measured: bool,
}

/// A term (main effect or interaction): a non-empty set of factors.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Term {
    /// Factor indices, ascending.
    pub factors: Vec<usize>,
    /// Id: factor names joined by `:` in `--factors` order (`A`, `A:B`).
    pub name: String,
    /// Degrees of freedom ∏_{f∈S}(a_f − 1).
    pub df: usize,
}

/// Factors, their level counts and the full-factorial terms; no data.
#[derive(Debug, Clone, PartialEq)]
pub struct Layout {
    /// Factors in `--factors` order.
    pub factors: Vec<Factor>,
    /// Level count of each factor.
    pub shape: Vec<usize>,
    /// All 2^k − 1 terms in canonical order: by size, then lexicographic in factor indices.
    pub terms: Vec<Term>,
}

impl Layout {
    /// The layout of factors with these levels.
    pub fn new(factors: Vec<Factor>) -> Layout {
        let shape: Vec<usize> = factors.iter().map(|f| f.levels.len()).collect();
        let k = factors.len();
        let mut subsets: Vec<Vec<usize>> =
            (1u32..(1 << k)).map(|mask| (0..k).filter(|&f| mask & (1 << f) != 0).collect()).collect();
        subsets.sort_by(|a, b| a.len().cmp(&b.len()).then_with(|| a.cmp(b)));
        let terms = subsets
            .into_iter()
            .map(|fs| Term {
                name: fs.iter().map(|&f| factors[f].name.as_str()).collect::<Vec<_>>().join(":"),
                df: fs.iter().map(|&f| shape[f] - 1).product(),
                factors: fs,
            })
            .collect();
        Layout { factors, shape, terms }
    }

    /// Number of cells C = ∏ a_f.
    pub fn n_cells(&self) -> usize {
        self.shape.iter().product()
    }

    /// Level index of each factor for cell `c`.
    pub fn cell_levels(&self, c: usize) -> Vec<usize> {
        let mut rest = c;
        let mut levels = vec![0; self.shape.len()];
        for f in (0..self.shape.len()).rev() {
            levels[f] = rest % self.shape[f];
            rest /= self.shape[f];
        }
        levels
    }

    /// Cell index of a level combination.
    pub fn cell_index(&self, levels: &[usize]) -> usize {
        levels.iter().zip(&self.shape).fold(0, |acc, (&l, &a)| acc * a + l)
    }

    /// Level labels of cell `c`.
    pub fn cell_labels(&self, c: usize) -> Vec<String> {
        self.cell_levels(c).iter().enumerate().map(|(f, &l)| self.factors[f].levels[l].clone()).collect()
    }

    /// `A=a1, B=b2`: a cell named for people.
    pub fn cell_name(&self, c: usize) -> String {
        self.cell_levels(c)
            .iter()
            .enumerate()
            .map(|(f, &l)| format!("{}={}", self.factors[f].name, self.factors[f].levels[l]))
            .collect::<Vec<_>>()
            .join(", ")
    }

    /// Index of the term with this id.
    pub fn term_index(&self, name: &str) -> Option<usize> {
        self.terms.iter().position(|t| t.name == name)
    }
}

/// The design with its data in canonical observation order.
#[derive(Debug, Clone)]
pub struct Design {
    /// Outcome column name.
    pub outcome: String,
    /// Factors and terms.
    pub layout: Layout,
    cell_start: Vec<usize>,
    y: Vec<f64>,
    location: f64,
    lines: Vec<u64>,
    /// Every cell's values in ascending order, with their positions in the cell;
    /// computed on first use ([`Design::sorted_cell`]).
    sorted: OnceLock<SortedCells>,
}

/// Every cell sorted: `values` holds each cell's values ascending at the cell's own range
/// of the canonical order, `order` their positions within the cell (ties in input
/// order).
#[derive(Debug, Clone)]
struct SortedCells {
    values: Vec<f64>,
    order: Vec<usize>,
}

/// Sorts (key, position) pairs by key, keeping input order among equal keys: a
/// least-significant-digit radix sort on 11-bit digits (stable), which skips a digit
/// that every key shares. The counts of every digit come from one pass over the keys;
/// `scratch` is working space (kept by the caller for the next sort). Small inputs use
/// the comparison sort on (key, position), which gives the same order.
fn radix_sort(a: &mut Vec<(u64, usize)>, scratch: &mut Vec<(u64, usize)>) {
    const BITS: u32 = 11;
    const BUCKETS: usize = 1 << BITS;
    const DIGITS: usize = 64usize.div_ceil(BITS as usize);
    if a.len() <= 256 {
        a.sort_unstable();
        return;
    }
    let mut counts = vec![[0usize; BUCKETS]; DIGITS];
    for &(k, _) in a.iter() {
        for (d, c) in counts.iter_mut().enumerate() {
            c[((k >> (d as u32 * BITS)) as usize) & (BUCKETS - 1)] += 1;
        }
    }
    scratch.clear();
    scratch.resize(a.len(), (0, 0));
    for (d, c) in counts.iter_mut().enumerate() {
        if c.contains(&a.len()) {
            continue;
        }
        let shift = d as u32 * BITS;
        let mut total = 0;
        for slot in c.iter_mut() {
            let here = *slot;
            *slot = total;
            total += here;
        }
        for &(k, i) in a.iter() {
            let digit = ((k >> shift) as usize) & (BUCKETS - 1);
            scratch[c[digit]] = (k, i);
            c[digit] += 1;
        }
        std::mem::swap(a, scratch);
    }
}

impl Design {
    /// Builds the design from the rows read.
    ///
    /// # Errors
    /// Exit 2 for a one-level factor, labels differing only in spelling, or a bad
    /// `--levels`/`--measured`; exit 3 for more than [`MAX_CELLS`] cells or an empty cell.
    pub fn build(obs: &Observations, spec: &DataSpec) -> Result<Design> {
        let loc = Location::file(obs.source.clone());
        for (name, _) in &spec.levels {
            if !spec.factors.contains(name) {
                return Err(Error::usage(
                    format!("--levels names `{name}`, which is not one of the factors"),
                    format!("the factors are {}", spec.factors.join(", ")),
                ));
            }
        }
        for name in &spec.measured {
            if !spec.factors.contains(name) {
                return Err(Error::usage(
                    format!("--measured names `{name}`, which is not one of the factors"),
                    format!("the factors are {}", spec.factors.join(", ")),
                ));
            }
        }
        // Level order per factor: order[f][level] = label index.
        let mut orders = Vec::with_capacity(obs.factors.len());
        for col in &obs.factors {
            check_spellings(col, &loc)?;
            let user = spec.levels.iter().find(|(n, _)| *n == col.name).map(|(_, l)| l);
            let order = level_order(col, user)?;
            if order.len() < 2 {
                return Err(Error::input_hint(
                    loc.in_column(col.name.clone()),
                    format!(
                        "factor `{}` has only one level (`{}`) among the rows used",
                        col.name,
                        col.labels.first().map(String::as_str).unwrap_or("")
                    ),
                    "a factor needs at least two levels; drop it from --factors",
                ));
            }
            orders.push(order);
        }
        // Size check before allocating anything per cell.
        let mut cells: usize = 1;
        for order in &orders {
            cells = cells.saturating_mul(order.len());
            if cells > MAX_CELLS {
                let sizes: Vec<String> =
                    obs.factors.iter().zip(&orders).map(|(c, o)| format!("{} ({})", c.name, o.len())).collect();
                return Err(Error::impossible(format!(
                    "the factors {} make more than {MAX_CELLS} cells; quorum supports at most {MAX_CELLS}",
                    sizes.join(" × ")
                )));
            }
        }
        let factors: Vec<Factor> = obs
            .factors
            .iter()
            .zip(&orders)
            .map(|(col, order)| Factor {
                name: col.name.clone(),
                levels: order.iter().map(|&i| col.labels[i].clone()).collect(),
                measured: spec.measured.contains(&col.name),
            })
            .collect();
        let layout = Layout::new(factors);
        // label index → level index
        let rank: Vec<Vec<usize>> = orders
            .iter()
            .map(|order| {
                let mut r = vec![0; order.len()];
                for (level, &label) in order.iter().enumerate() {
                    r[label] = level;
                }
                r
            })
            .collect();
        let n_obs = obs.y.len();
        let cell_of: Vec<usize> = (0..n_obs)
            .map(|i| {
                obs.factors
                    .iter()
                    .enumerate()
                    .fold(0usize, |acc, (f, col)| acc * layout.shape[f] + rank[f][col.codes[i] as usize])
            })
            .collect();
        let mut counts = vec![0usize; cells];
        for &c in &cell_of {
            counts[c] += 1;
        }
        let empty: Vec<usize> = (0..cells).filter(|&c| counts[c] == 0).collect();
        if !empty.is_empty() {
            let shown: Vec<String> = empty.iter().take(5).map(|&c| format!("({})", layout.cell_name(c))).collect();
            let more = if empty.len() > 5 { format!(" and {} more", empty.len() - 5) } else { String::new() };
            return Err(Error::impossible(format!(
                "{} empty cell(s): {}{more}; quorum requires a complete factorial (every combination of levels observed)",
                empty.len(),
                shown.join(", ")
            )));
        }
        let mut cell_start = vec![0usize; cells + 1];
        for c in 0..cells {
            cell_start[c + 1] = cell_start[c] + counts[c];
        }
        let mut next = cell_start[..cells].to_vec();
        let mut y = vec![0.0; n_obs];
        let mut lines = vec![0u64; n_obs];
        for (i, &c) in cell_of.iter().enumerate() {
            y[next[c]] = obs.y[i];
            lines[next[c]] = obs.lines[i];
            next[c] += 1;
        }
        Ok(Design {
            outcome: obs.outcome.clone(),
            layout,
            cell_start,
            y,
            location: obs.location,
            lines,
            sorted: OnceLock::new(),
        })
    }

    /// A design from cell data given directly (tests, simulations): `cells[c]` holds the
    /// outcome values of cell `c` in cell order; lines are numbered from 2 in that order.
    ///
    /// # Errors
    /// Exit 3 for an empty cell or a cell count that does not match the factors.
    pub fn from_cells(outcome: &str, factors: Vec<Factor>, cells: &[Vec<f64>]) -> Result<Design> {
        let layout = Layout::new(factors);
        if cells.len() != layout.n_cells() {
            return Err(Error::impossible(format!(
                "{} cells given for a design with {}",
                cells.len(),
                layout.n_cells()
            )));
        }
        if let Some(c) = cells.iter().position(Vec::is_empty) {
            return Err(Error::impossible(format!("empty cell ({})", layout.cell_name(c))));
        }
        let mut cell_start = vec![0];
        let mut y = Vec::new();
        for cell in cells {
            y.extend_from_slice(cell);
            cell_start.push(y.len());
        }
        let lines = (0..y.len() as u64).map(|i| i + 2).collect();
        Ok(Design {
            outcome: outcome.to_string(),
            layout,
            cell_start,
            y,
            location: 0.0,
            lines,
            sorted: OnceLock::new(),
        })
    }

    /// Checks what every test of the full factorial needs: residual degrees of freedom
    /// and a non-constant outcome.
    ///
    /// # Errors
    /// Exit 3 naming the problem.
    pub fn check_testable(&self) -> Result<()> {
        if self.n_obs() <= self.n_cells() {
            return Err(Error::impossible(format!(
                "no residual degrees of freedom: {} observations in {} cells (every cell has one observation); the factorial model needs at least one cell with two or more",
                self.n_obs(),
                self.n_cells()
            )));
        }
        let first = self.y[0];
        if self.y.iter().all(|&v| v == first) {
            return Err(Error::impossible(format!(
                "the outcome `{}` is constant ({}) in every row used",
                self.outcome,
                first + self.location
            )));
        }
        Ok(())
    }

    /// Number of observations N.
    pub fn n_obs(&self) -> usize {
        self.y.len()
    }

    /// Number of cells C.
    pub fn n_cells(&self) -> usize {
        self.cell_start.len() - 1
    }

    /// Factors, in `--factors` order.
    pub fn factors(&self) -> &[Factor] {
        &self.layout.factors
    }

    /// Terms in canonical order.
    pub fn terms(&self) -> &[Term] {
        &self.layout.terms
    }

    /// Level count of each factor.
    pub fn shape(&self) -> &[usize] {
        &self.layout.shape
    }

    /// Index range of cell `c` in canonical observation order.
    pub fn cell_range(&self, c: usize) -> std::ops::Range<usize> {
        self.cell_start[c]..self.cell_start[c + 1]
    }

    /// Size of every cell.
    pub fn cell_sizes(&self) -> Vec<usize> {
        self.cell_start.windows(2).map(|w| w[1] - w[0]).collect()
    }

    /// Centred outcome values (add [`Design::location`] for the recorded values), canonical order.
    pub fn y(&self) -> &[f64] {
        &self.y
    }

    /// A slice in canonical observation order (`v.len()` = N) cut at the cell
    /// boundaries: one mutable piece per cell, so that cells can be filled in parallel.
    pub fn split_cells_mut<'a, T>(&self, v: &'a mut [T]) -> Vec<&'a mut [T]> {
        let mut parts = Vec::with_capacity(self.n_cells());
        let mut rest = v;
        for c in 0..self.n_cells() {
            let (part, tail) = rest.split_at_mut(self.cell_range(c).len());
            parts.push(part);
            rest = tail;
        }
        parts
    }

    /// Centred outcome values of cell `c`.
    pub fn cell_values(&self, c: usize) -> &[f64] {
        &self.y[self.cell_range(c)]
    }

    /// The value added back for location statistics.
    pub fn location(&self) -> f64 {
        self.location
    }

    /// Input line of each observation, canonical order.
    pub fn lines(&self) -> &[u64] {
        &self.lines
    }

    /// True when every cell has the same size.
    pub fn is_balanced(&self) -> bool {
        let sizes = self.cell_sizes();
        sizes.iter().all(|&n| n == sizes[0])
    }

    /// Cell sums of a response vector given in canonical order.
    pub fn cell_sums(&self, y: &[f64]) -> Vec<f64> {
        self.cell_start.windows(2).map(|w| y[w[0]..w[1]].iter().sum()).collect()
    }
}

impl Design {
    /// The same design without the observations at the given canonical positions
    /// (sensitivity variants): factors, levels and cell structure are kept, every
    /// observation that is not dropped keeps its value, line and order, and every
    /// derived quantity is recomputed from the kept rows by whoever uses the new design.
    /// Positions out of range are ignored.
    ///
    /// # Errors
    /// Exit 3 when a cell would be left empty (the caller turns this into
    /// `not_applicable` results for a variant).
    pub fn without_observations(&self, drop: &[usize]) -> Result<Design> {
        let mut keep = vec![true; self.y.len()];
        for &i in drop {
            if let Some(k) = keep.get_mut(i) {
                *k = false;
            }
        }
        let mut cell_start = Vec::with_capacity(self.cell_start.len());
        cell_start.push(0);
        let mut y = Vec::with_capacity(self.y.len());
        let mut lines = Vec::with_capacity(self.y.len());
        let mut empty = Vec::new();
        for c in 0..self.n_cells() {
            let before = y.len();
            for i in self.cell_range(c) {
                if keep[i] {
                    y.push(self.y[i]);
                    lines.push(self.lines[i]);
                }
            }
            if y.len() == before {
                empty.push(c);
            }
            cell_start.push(y.len());
        }
        if !empty.is_empty() {
            let names: Vec<String> = empty.iter().map(|&c| format!("({})", self.layout.cell_name(c))).collect();
            return Err(Error::impossible(format!("removing the points leaves {} empty", names.join(", "))));
        }
        Ok(Design {
            outcome: self.outcome.clone(),
            layout: self.layout.clone(),
            cell_start,
            y,
            location: self.location,
            lines,
            sorted: OnceLock::new(),
        })
    }

    /// Sorts every cell on first use. The cells are shared out to plain scoped threads
    /// (as many as the rayon pool has), not to rayon: a rayon worker that waits inside
    /// this initialiser could otherwise pick up a queued task that asks for the sorted
    /// cells again and block on itself. Each cell is sorted on its own, so the result
    /// does not depend on the thread count.
    fn sorted_cells(&self) -> &SortedCells {
        self.sorted.get_or_init(|| {
            let n_cells = self.n_cells();
            // Each cell is sorted into its own range of the two outputs; cells are
            // handed out to the threads one at a time.
            let mut values = vec![0.0; self.y.len()];
            let mut order = vec![0usize; self.y.len()];
            // Each thread keeps its two working buffers from one cell to the next.
            type Buffers = (Vec<(u64, usize)>, Vec<(u64, usize)>);
            let sort_cell = |c: usize, values: &mut [f64], order: &mut [usize], (keyed, scratch): &mut Buffers| {
                let cell = self.cell_values(c);
                keyed.clear();
                keyed.extend(cell.iter().enumerate().map(|(i, &v)| (crate::summary::total_order_key(v), i)));
                radix_sort(keyed, scratch);
                for ((value, position), &(_, i)) in values.iter_mut().zip(order.iter_mut()).zip(keyed.iter()) {
                    *value = cell[i];
                    *position = i;
                }
            };
            let parts: Vec<(&mut [f64], &mut [usize])> =
                self.split_cells_mut(&mut values).into_iter().zip(self.split_cells_mut(&mut order)).collect();
            let threads = rayon::current_num_threads().clamp(1, n_cells.max(1));
            if threads == 1 || self.y.len() < 65_536 {
                let mut buffers = Buffers::default();
                for (c, (v, o)) in parts.into_iter().enumerate() {
                    sort_cell(c, v, o, &mut buffers);
                }
            } else {
                let parts: Vec<std::sync::Mutex<(&mut [f64], &mut [usize])>> =
                    parts.into_iter().map(std::sync::Mutex::new).collect();
                let next = std::sync::atomic::AtomicUsize::new(0);
                std::thread::scope(|scope| {
                    for _ in 0..threads {
                        scope.spawn(|| {
                            let mut buffers = Buffers::default();
                            loop {
                                let c = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                                let Some(part) = parts.get(c) else { break };
                                // Each cell is claimed by one thread, so the lock is never
                                // contended (and never poisoned: a panic here ends the scope).
                                let mut guard = part.lock().unwrap_or_else(std::sync::PoisonError::into_inner);
                                let (v, o) = &mut *guard;
                                sort_cell(c, v, o, &mut buffers);
                            }
                        });
                    }
                });
            }
            SortedCells { values, order }
        })
    }

    /// Cell `c`'s centred values in ascending order (`f64::total_cmp`). All cells are
    /// sorted together, in parallel, on the first call (safe to call from rayon tasks).
    pub fn sorted_cell(&self, c: usize) -> &[f64] {
        &self.sorted_cells().values[self.cell_range(c)]
    }

    /// Positions within cell `c` of its values in ascending order (ties in input order):
    /// `sorted_cell(c)[k] == cell_values(c)[sorted_positions(c)[k]]`.
    pub fn sorted_positions(&self, c: usize) -> &[usize] {
        &self.sorted_cells().order[self.cell_range(c)]
    }
}

/// Order of a factor's labels: user-given, numeric, or code-point order.
fn level_order(col: &FactorColumn, user: Option<&Vec<String>>) -> Result<Vec<usize>> {
    let labels = &col.labels;
    if let Some(user) = user {
        let mut order = Vec::with_capacity(user.len());
        for (i, want) in user.iter().enumerate() {
            if user[..i].contains(want) {
                return Err(Error::usage(
                    format!("--levels lists `{want}` twice for factor `{}`", col.name),
                    "list each level once",
                ));
            }
            match labels.iter().position(|l| l == want) {
                Some(idx) => order.push(idx),
                None => {
                    return Err(Error::usage(
                        format!("--levels gives `{want}` for factor `{}`, but no row used has that level", col.name),
                        format!("the levels found are {}", quoted(labels)),
                    ))
                }
            }
        }
        if let Some(extra) = labels.iter().find(|l| !user.contains(l)) {
            return Err(Error::usage(
                format!("--levels for factor `{}` leaves out the level `{extra}` found in the data", col.name),
                format!("list every level: {}", quoted(labels)),
            ));
        }
        return Ok(order);
    }
    let mut order: Vec<usize> = (0..labels.len()).collect();
    let numeric: Option<Vec<f64>> = labels.iter().map(|l| parse_level_number(l)).collect();
    match numeric {
        Some(values) => order.sort_by(|&i, &j| values[i].total_cmp(&values[j])),
        None => order.sort_by(|&i, &j| labels[i].cmp(&labels[j])),
    }
    Ok(order)
}

fn parse_level_number(label: &str) -> Option<f64> {
    let v: f64 = label.trim().parse().ok()?;
    v.is_finite().then_some(if v == 0.0 { 0.0 } else { v })
}

fn quoted(labels: &[String]) -> String {
    labels.iter().map(|l| format!("`{l}`")).collect::<Vec<_>>().join(", ")
}

/// Labels that differ only in case, surrounding whitespace or numeric spelling are
/// never merged silently: this is an input error naming both spellings.
fn check_spellings(col: &FactorColumn, loc: &Location) -> Result<()> {
    let mut seen: HashMap<String, usize> = HashMap::new();
    for (i, label) in col.labels.iter().enumerate() {
        let key = match parse_level_number(label) {
            Some(v) => format!("\u{0}num:{}", v.to_bits()),
            None => label.trim().to_lowercase(),
        };
        if let Some(&j) = seen.get(&key) {
            return Err(Error::input_hint(
                loc.in_column(col.name.clone()),
                format!(
                    "factor `{}` has the labels `{}` (line {}) and `{}` (line {}), which differ only in case, surrounding spaces or numeric spelling",
                    col.name, col.labels[j], col.first_line[j], label, col.first_line[i]
                ),
                "quorum never merges levels silently: spell each level the same way throughout the file",
            ));
        }
        seen.insert(key, i);
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::Source;

    #[test]
    fn sorted_cells_from_inside_rayon_tasks_on_any_pool() {
        // 16 cells of 5000 values: large enough for the threaded sort. Asked for first
        // from inside parallel tasks (which must not block on themselves); the same
        // result on 1 and 8 threads.
        let mut x: u64 = 0x2545_F491_4F6C_DD1D;
        let cells: Vec<Vec<f64>> = (0..16)
            .map(|_| {
                (0..5000)
                    .map(|_| {
                        x ^= x << 13;
                        x ^= x >> 7;
                        x ^= x << 17;
                        (x % 2000) as f64 / 8.0 - 100.0
                    })
                    .collect()
            })
            .collect();
        let factors = vec![
            Factor { name: "A".into(), levels: (0..4).map(|i| format!("a{i}")).collect(), measured: false },
            Factor { name: "B".into(), levels: (0..4).map(|i| format!("b{i}")).collect(), measured: false },
        ];
        let run = |threads: usize| {
            let design = Design::from_cells("y", factors.clone(), &cells).unwrap();
            let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
            pool.install(|| {
                use rayon::prelude::*;
                (0..16)
                    .into_par_iter()
                    .map(|c| (design.sorted_cell(c).to_vec(), design.sorted_positions(c).to_vec()))
                    .collect::<Vec<_>>()
            })
        };
        let (one, eight) = (run(1), run(8));
        assert_eq!(one, eight);
        for (c, (sorted, positions)) in one.iter().enumerate() {
            let mut want = cells[c].clone();
            want.sort_by(f64::total_cmp);
            assert_eq!(sorted, &want);
            assert!(positions.iter().zip(sorted).all(|(&i, &v)| cells[c][i] == v));
            assert!(positions.windows(2).zip(sorted.windows(2)).all(|(p, v)| v[0] < v[1] || p[0] < p[1]));
        }
    }

    #[test]
    fn radix_sort_matches_the_comparison_sort() {
        let mut x: u64 = 0x9E37_79B9_7F4A_7C15;
        let values: Vec<f64> = (0..5000)
            .map(|i| {
                x ^= x << 13;
                x ^= x >> 7;
                x ^= x << 17;
                match i % 7 {
                    0 => -0.0,
                    1 => 0.0,
                    2 => ((x % 50) as f64) - 25.0, // many ties
                    3 => f64::MIN_POSITIVE * (x % 3) as f64,
                    _ => (x as f64 / u64::MAX as f64 - 0.5) * 1e6,
                }
            })
            .collect();
        let keyed: Vec<(u64, usize)> =
            values.iter().enumerate().map(|(i, &v)| (crate::summary::total_order_key(v), i)).collect();
        let mut expected = keyed.clone();
        expected.sort_unstable();
        let (mut sorted, mut scratch) = (keyed.clone(), Vec::new());
        radix_sort(&mut sorted, &mut scratch);
        assert_eq!(sorted, expected);
        // The working buffers may come from an earlier, longer sort.
        let mut again = keyed[..3000].to_vec();
        radix_sort(&mut again, &mut scratch);
        let mut want = keyed[..3000].to_vec();
        want.sort_unstable();
        assert_eq!(again, want);
        let mut by_value: Vec<usize> = (0..values.len()).collect();
        by_value.sort_by(|&a, &b| values[a].total_cmp(&values[b]).then(a.cmp(&b)));
        assert_eq!(expected.iter().map(|p| p.1).collect::<Vec<_>>(), by_value);
    }

    fn spec(factors: &[&str]) -> DataSpec {
        DataSpec::new(Source::Stdin, "y", factors)
    }

    fn build(text: &str, spec: &DataSpec) -> Result<Design> {
        let obs = crate::data::parse(text.as_bytes(), spec, "t.csv", &Location::file("t.csv"))?;
        Design::build(&obs, spec)
    }

    #[test]
    fn terms_are_in_canonical_order() {
        let f = |n: &str, a: usize| Factor {
            name: n.into(),
            levels: (0..a).map(|i| i.to_string()).collect(),
            measured: false,
        };
        let layout = Layout::new(vec![f("A", 2), f("B", 3), f("C", 2)]);
        let names: Vec<&str> = layout.terms.iter().map(|t| t.name.as_str()).collect();
        assert_eq!(names, vec!["A", "B", "C", "A:B", "A:C", "B:C", "A:B:C"]);
        let dfs: Vec<usize> = layout.terms.iter().map(|t| t.df).collect();
        assert_eq!(dfs, vec![1, 2, 1, 2, 1, 2, 2]);
        // Row-major cells, last factor fastest.
        assert_eq!(layout.cell_levels(0), vec![0, 0, 0]);
        assert_eq!(layout.cell_levels(1), vec![0, 0, 1]);
        assert_eq!(layout.cell_levels(2), vec![0, 1, 0]);
        assert_eq!(layout.cell_index(&[1, 2, 1]), 11);
    }

    #[test]
    fn levels_sort_numerically_or_by_code_point() {
        let d = build("y,a,b\n1,10,b\n2,9,a\n3,10,a\n4,9,b\n5,9,Z\n6,10,Z\n", &spec(&["a", "b"])).unwrap();
        assert_eq!(d.factors()[0].levels, vec!["9", "10"]);
        assert_eq!(d.factors()[1].levels, vec!["Z", "a", "b"]);
        // Canonical order: sorted by cell, input order within a cell.
        assert_eq!(d.lines(), &[6, 3, 5, 7, 4, 2]);
    }

    #[test]
    fn user_level_order_wins_and_is_checked() {
        let mut s = spec(&["a"]);
        s.levels = vec![("a".into(), vec!["hi".into(), "lo".into()])];
        let d = build("y,a\n1,lo\n2,hi\n3,lo\n", &s).unwrap();
        assert_eq!(d.factors()[0].levels, vec!["hi", "lo"]);
        s.levels = vec![("a".into(), vec!["hi".into()])];
        assert_eq!(build("y,a\n1,lo\n2,hi\n", &s).unwrap_err().exit_code(), 2);
        s.levels = vec![("a".into(), vec!["hi".into(), "lo".into(), "mid".into()])];
        assert_eq!(build("y,a\n1,lo\n2,hi\n", &s).unwrap_err().exit_code(), 2);
    }

    #[test]
    fn near_duplicate_spellings_are_refused() {
        for (a, b) in [("1", "1.0"), ("low", "Low"), ("low", "low "), ("2", "+2")] {
            let text = format!("y,a\n1,{a}\n2,{b}\n3,{a}\n");
            let e = build(&text, &spec(&["a"])).unwrap_err();
            assert_eq!(e.exit_code(), 2);
            let msg = e.to_string();
            assert!(msg.contains("line 2") && msg.contains("line 3"), "{msg}");
        }
    }

    #[test]
    fn design_level_impossibilities() {
        let e = build("y,a,b\n1,x,p\n2,x,q\n3,y,p\n", &spec(&["a", "b"])).unwrap_err();
        assert_eq!(e.exit_code(), 3);
        assert!(e.to_string().contains("a=y, b=q"), "{e}");
        let e = build("y,a\n1,x\n2,x\n", &spec(&["a"])).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        let d = build("y,a\n1,x\n2,y\n", &spec(&["a"])).unwrap();
        assert_eq!(d.check_testable().unwrap_err().exit_code(), 3);
        let d = build("y,a\n1,x\n1,y\n1,y\n", &spec(&["a"])).unwrap();
        assert_eq!(d.check_testable().unwrap_err().exit_code(), 3);
    }

    #[test]
    fn too_many_cells_is_refused_before_allocation() {
        let mut text = String::from("y,a,b\n");
        for i in 0..101 {
            text.push_str(&format!("{i},a{i},b{i}\n"));
        }
        let e = build(&text, &spec(&["a", "b"])).unwrap_err();
        assert_eq!(e.exit_code(), 3);
        assert!(e.to_string().contains("10000"), "{e}");
    }
}
