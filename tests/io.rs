//! File input and output: Matrix Market matrices, CSV load tables, initial conditions and
//! histories, checkpoints. Files go into a fresh directory under the system's temp
//! directory, removed at the end of each test.

mod common;

use std::fs;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use proptest::prelude::*;
use sprs::{CsMat, TriMat};
use stepgauge::State;
use stepgauge::energy::EnergyLedger;
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
use stepgauge::io::checkpoint::CHECKPOINT_FORMAT_VERSION;
use stepgauge::io::csv::{ENERGY_HEADER, validate_dofs};
use stepgauge::io::{
    Checkpoint, parse_initial, parse_load_table, parse_matrix_market, read_checkpoint,
    read_initial, read_load_table, read_matrix_market, write_checkpoint, write_energy_csv,
    write_matrix_market, write_record_csv,
};
use stepgauge::model::{LinearModel, Load, Model, TimeFunction};
use stepgauge::run::{Flow, RecordOptions, RunOptions, StepControl, run};
use stepgauge::{Error, Result};

/// A directory of its own under the system's temp directory, removed on drop.
struct Scratch(PathBuf);

impl Scratch {
    fn new(tag: &str) -> Self {
        static N: AtomicU64 = AtomicU64::new(0);
        let nanos = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.subsec_nanos())
            .unwrap_or(0);
        let dir = std::env::temp_dir().join(format!(
            "stepgauge-io-{tag}-{}-{}-{nanos}",
            std::process::id(),
            N.fetch_add(1, Ordering::Relaxed)
        ));
        fs::create_dir_all(&dir).unwrap();
        Scratch(dir)
    }

    fn path(&self, name: &str) -> PathBuf {
        self.0.join(name)
    }

    fn write(&self, name: &str, text: &str) -> PathBuf {
        let p = self.path(name);
        fs::write(&p, text).unwrap();
        p
    }

    /// The names of the files in the directory, sorted.
    fn entries(&self) -> Vec<String> {
        let mut v: Vec<String> = fs::read_dir(&self.0)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = fs::remove_dir_all(&self.0);
    }
}

fn dense(m: &CsMat<f64>) -> Vec<Vec<f64>> {
    (0..m.rows())
        .map(|i| {
            (0..m.cols())
                .map(|j| m.get(i, j).copied().unwrap_or(0.0))
                .collect()
        })
        .collect()
}

/// `(row, col, value bits)` of every stored entry, in CSR order.
fn entries(m: &CsMat<f64>) -> Vec<(usize, usize, u64)> {
    let csr = m.to_csr();
    csr.outer_iterator()
        .enumerate()
        .flat_map(|(i, r)| {
            r.iter()
                .map(|(j, v)| (i, j, v.to_bits()))
                .collect::<Vec<_>>()
        })
        .collect()
}

// ---------------------------------------------------------------------------------------------
// Matrix Market

#[test]
fn matrix_market_general_and_symmetric_files_give_the_expected_dense_values() {
    let dir = Scratch::new("mm-read");
    // The 4 x 4 stiffness of a fixed-free chain of unit springs, stored as the lower triangle
    // (exact values by construction).
    let sym = dir.write(
        "k.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n\
         % fixed-free chain, k = 1\n\
         4 4 7\n\
         1 1 2\n2 1 -1\n2 2 2\n3 2 -1\n3 3 2\n4 3 -1\n4 4 1\n",
    );
    let k = read_matrix_market(&sym).unwrap();
    assert_eq!(
        dense(&k),
        vec![
            vec![2.0, -1.0, 0.0, 0.0],
            vec![-1.0, 2.0, -1.0, 0.0],
            vec![0.0, -1.0, 2.0, -1.0],
            vec![0.0, 0.0, -1.0, 1.0],
        ]
    );
    assert_eq!(k.nnz(), 10);
    let gen_ = dir.write(
        "g.mtx",
        "%%MatrixMarket MATRIX coordinate INTEGER general\n%\n\n2 3 4\n2 3 7\n1 1 -4\n1 3 1\n1 3 2\n",
    );
    let g = read_matrix_market(&gen_).unwrap();
    // Duplicates (1, 3) summed: 1 + 2.
    assert_eq!(dense(&g), vec![vec![-4.0, 0.0, 3.0], vec![0.0, 0.0, 7.0]]);
    // A model is built from what was read.
    let m = read_matrix_market(&dir.write(
        "m.mtx",
        "%%MatrixMarket matrix coordinate real general\n4 4 4\n1 1 1\n2 2 1\n3 3 1\n4 4 1\n",
    ))
    .unwrap();
    assert_eq!(LinearModel::new(&m, &k).unwrap().dofs(), 4);
}

/// A deterministic pseudo-random sequence (64-bit LCG, Knuth's MMIX constants).
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> u64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        self.0 >> 11
    }
    /// A double of any sign and of magnitude anywhere between about 1e-300 and 1e300.
    fn value(&mut self) -> f64 {
        let mantissa = (self.next() as f64) / (1u64 << 53) as f64 + 0.5;
        let exponent = (self.next() % 1993) as i32 - 996;
        let sign = if self.next().is_multiple_of(2) {
            1.0
        } else {
            -1.0
        };
        sign * mantissa * 2f64.powi(exponent)
    }
}

fn random_matrix(rng: &mut Lcg, rows: usize, cols: usize, symmetric: bool) -> CsMat<f64> {
    let mut t = TriMat::new((rows, cols));
    for i in 0..rows {
        for j in 0..cols {
            if (symmetric && j > i) || !rng.next().is_multiple_of(3) {
                continue;
            }
            let v = match rng.next() % 6 {
                0 => 0.0, // a stored zero stays stored
                1 => -0.0,
                2 => 0.1 * (i + j) as f64,
                _ => rng.value(),
            };
            t.add_triplet(i, j, v);
            if symmetric && i != j {
                t.add_triplet(j, i, v);
            }
        }
    }
    t.to_csr()
}

#[test]
fn matrix_market_write_then_read_is_bit_exact() {
    let dir = Scratch::new("mm-roundtrip");
    let mut rng = Lcg(2024);
    for (k, &(rows, cols, symmetric)) in [
        (7, 5, false),
        (1, 1, false),
        (12, 12, true),
        (30, 30, true),
        (0, 0, false),
        (3, 40, false),
    ]
    .iter()
    .enumerate()
    {
        let m = random_matrix(&mut rng, rows, cols, symmetric);
        let path = dir.path(&format!("m{k}.mtx"));
        write_matrix_market(&path, &m, symmetric).unwrap();
        let back = read_matrix_market(&path).unwrap();
        assert_eq!((back.rows(), back.cols()), (rows, cols));
        assert_eq!(entries(&back), entries(&m), "matrix {k}");
        // Also as general, and from CSC storage.
        write_matrix_market(&path, &m.to_csc(), false).unwrap();
        assert_eq!(entries(&read_matrix_market(&path).unwrap()), entries(&m));
    }
    // Only the matrix files remain: no scratch files.
    assert_eq!(dir.entries().len(), 6);
}

#[test]
fn matrix_market_writer_refuses_what_it_cannot_write_and_keeps_the_old_file() {
    let dir = Scratch::new("mm-refuse");
    let path = dir.write("k.mtx", "old");
    let unsym = common::dense(&[&[1.0, 2.0], &[3.0, 4.0]]);
    let e = write_matrix_market(&path, &unsym, true).unwrap_err();
    assert!(matches!(e, Error::InvalidMatrix { .. }), "{e}");
    assert!(e.to_string().contains("not exactly symmetric"), "{e}");
    let mut t = TriMat::new((2, 2));
    t.add_triplet(1, 0, f64::NAN);
    let e = write_matrix_market(&path, &t.to_csr(), false).unwrap_err();
    assert!(e.to_string().contains("entry (1, 0) is NaN"), "{e}");
    let e = write_matrix_market(&path, &common::dense(&[&[1.0, 2.0]]), true).unwrap_err();
    assert!(e.to_string().contains("square"), "{e}");
    assert_eq!(fs::read_to_string(&path).unwrap(), "old");
    // A directory that does not exist: an I/O error naming the path, nothing left behind.
    let missing = dir.path("no-such-dir").join("k.mtx");
    let e = write_matrix_market(&missing, &unsym, false).unwrap_err();
    assert!(
        matches!(&e, Error::Io { path, .. } if path == &missing),
        "{e}"
    );
    assert!(e.to_string().contains("no-such-dir"), "{e}");
    assert_eq!(dir.entries(), vec!["k.mtx".to_string()]);
}

/// The line of a `MatrixMarket` error, checking the file name.
fn mm_line(path: &Path) -> (usize, String) {
    match read_matrix_market(path) {
        Err(Error::MatrixMarket {
            file,
            line,
            problem,
        }) => {
            assert_eq!(file, path.display().to_string());
            (line, problem)
        }
        other => panic!("{}: {other:?}", path.display()),
    }
}

#[test]
fn matrix_market_files_with_errors_name_file_and_line() {
    let dir = Scratch::new("mm-errors");
    let h = "%%MatrixMarket matrix coordinate real general\n";
    let cases: &[(&str, String, usize, &str)] = &[
        ("empty", String::new(), 1, "empty"),
        (
            "no-header",
            "3 3 1\n1 1 1\n".into(),
            1,
            "expected the header",
        ),
        ("garbled", "%%MatrixMarket matrix\n".into(), 1, "2 words"),
        ("size", format!("{h}% c\n3 3\n"), 3, "size line"),
        ("fields", format!("{h}3 3 2\n1 1 1\n2 2\n"), 4, "2 fields"),
        (
            "value",
            format!("{h}3 3 1\n1 1 1,5\n"),
            3,
            "`1,5` is not a number",
        ),
        (
            "range",
            format!("{h}3 3 1\n1 4 1\n"),
            3,
            "column index 4 is out of range for the 3 columns",
        ),
        ("zero", format!("{h}3 3 1\n0 1 1\n"), 3, "index is 0"),
        ("nan", format!("{h}3 3 1\n1 1 nan\n"), 3, "not finite"),
        (
            "fewer",
            format!("{h}3 3 3\n1 1 1\n2 2 2\n"),
            5,
            "after 2 of the 3 entries",
        ),
        (
            "more",
            format!("{h}3 3 1\n1 1 1\n2 2 2\n"),
            4,
            "more entries than the 1",
        ),
    ];
    for (name, text, line, needle) in cases {
        let p = dir.write(name, text);
        let (l, problem) = mm_line(&p);
        assert_eq!(l, *line, "{name}: {problem}");
        assert!(
            problem.contains(needle),
            "{name}: `{problem}` lacks `{needle}`"
        );
        // The message names the file and the line.
        let msg = read_matrix_market(&p).unwrap_err().to_string();
        assert!(msg.contains(&format!("{}:{line}:", p.display())), "{msg}");
    }
    // Not text: the line of the first invalid byte.
    let p = dir.path("binary.mtx");
    fs::write(
        &p,
        b"%%MatrixMarket matrix coordinate real general\n1 1 1\n\xff\xfe 1 1\n",
    )
    .unwrap();
    assert_eq!(mm_line(&p).0, 3);
    // Unsupported kinds are told apart from malformed files.
    let p = dir.write(
        "complex.mtx",
        "%%MatrixMarket matrix coordinate complex general\n",
    );
    let e = read_matrix_market(&p).unwrap_err();
    assert!(
        matches!(&e, Error::MatrixMarketUnsupported { qualifier, .. } if qualifier == "complex"),
        "{e}"
    );
    // A file that does not exist.
    let missing = dir.path("missing.mtx");
    let e = read_matrix_market(&missing).unwrap_err();
    assert!(
        matches!(&e, Error::Io { action: "read", path, .. } if path == &missing),
        "{e}"
    );
}

// ---------------------------------------------------------------------------------------------
// Load tables and initial conditions

#[test]
fn a_load_table_file_is_interpolated_held_and_zero_elsewhere() {
    let dir = Scratch::new("load");
    let path = dir.write(
        "load.csv",
        "# nodal loads\ntime,2,0\n0,0,1\n1,10,3\n\n3,-10,3\n",
    );
    let table = read_load_table(&path).unwrap();
    assert_eq!(table.dofs(), &[2, 0]);
    validate_dofs(&table, 3).unwrap();
    let mut model = LinearModel::new(&common::diag(&[1.0; 3]), &common::diag(&[1.0; 3]))
        .unwrap()
        .with_load(Load::Table(table.clone()))
        .unwrap();
    let mut f = vec![f64::NAN; 3];
    // Exact values by construction of the table (piecewise-linear, dyadic weights).
    for (t, expected) in [
        (-1.0, [1.0, 0.0, 0.0]), // held at the first row before it
        (0.0, [1.0, 0.0, 0.0]),
        (0.25, [1.5, 0.0, 2.5]),
        (1.0, [3.0, 0.0, 10.0]),
        (1.5, [3.0, 0.0, 5.0]),
        (2.0, [3.0, 0.0, 0.0]),
        (3.0, [3.0, 0.0, -10.0]),
        (100.0, [3.0, 0.0, -10.0]), // held at the last row after it
    ] {
        model.external_force(t, &mut f).unwrap();
        assert_eq!(f, expected, "t = {t}");
    }
    // DOF range is checked against the model.
    assert!(matches!(
        validate_dofs(&table, 2),
        Err(Error::DofOutOfRange { dof: 2, n: 2, .. })
    ));
    let e = LinearModel::new(&common::diag(&[1.0; 2]), &common::diag(&[1.0; 2]))
        .unwrap()
        .with_load(Load::Table(table))
        .unwrap_err();
    assert!(
        matches!(e, Error::DofOutOfRange { dof: 2, n: 2, .. }),
        "{e}"
    );
}

fn csv_line(r: Result<impl std::fmt::Debug>) -> (usize, String) {
    match r {
        Err(Error::Csv { line, problem, .. }) => (line, problem),
        other => panic!("expected a Csv error, got {other:?}"),
    }
}

#[test]
fn load_table_and_initial_condition_files_with_errors_name_the_line() {
    let dir = Scratch::new("csv-errors");
    let p = dir.write("l.csv", "time,0\n0,1\n0.5,2\n0.5,3\n");
    let (line, problem) = csv_line(read_load_table(&p));
    assert_eq!(line, 4, "{problem}");
    assert!(problem.contains("on line 3"), "{problem}");
    let msg = read_load_table(&p).unwrap_err().to_string();
    assert!(msg.starts_with(&format!("{}:4:", p.display())), "{msg}");
    let p = dir.write("dup.csv", "time,0,3,0\n0,1,2,3\n");
    assert_eq!(csv_line(read_load_table(&p)).0, 1);
    let p = dir.write("i.csv", "dof,u,v\n0,1,0\n5,0,1\n");
    let (line, problem) = csv_line(read_initial(&p, 5));
    assert_eq!(line, 3);
    assert!(
        problem.contains("DOF 5 is out of range for a model with 5 DOFs"),
        "{problem}"
    );
    let p = dir.path("none.csv");
    assert!(matches!(read_initial(&p, 5), Err(Error::Io { .. })));
    assert!(matches!(read_load_table(&p), Err(Error::Io { .. })));
}

#[test]
fn initial_conditions_from_a_file_start_a_state() {
    let dir = Scratch::new("initial");
    let p = dir.write("init.csv", "dof,u,v\n# tip pulled\n3,0.01,0\n1,0,-2.5\n");
    let (u, v) = read_initial(&p, 4).unwrap();
    let state = State::new(0.0, u, v).unwrap();
    assert_eq!(state.u, vec![0.0, 0.0, 0.0, 0.01]);
    assert_eq!(state.v, vec![0.0, -2.5, 0.0, 0.0]);
}

// ---------------------------------------------------------------------------------------------
// CSV writers

/// A damped chain of 6 DOFs driven at its free end, held at the left.
fn chain_model() -> LinearModel {
    let n = 6;
    LinearModel::new(
        &common::diag(&vec![1.0; n]),
        &common::chain_stiffness(n, 40.0, true, false),
    )
    .unwrap()
    .with_rayleigh(0.05, 0.001)
    .unwrap()
    .with_load(Load::Pattern {
        pattern: (0..n).map(|i| if i == n - 1 { 1.0 } else { 0.0 }).collect(),
        factor: TimeFunction::function(|t| (3.0 * t).sin()),
    })
    .unwrap()
}

/// Splits a CSV text into its header and rows of doubles.
fn read_back(text: &str) -> (String, Vec<Vec<f64>>) {
    let mut lines = text.lines();
    let header = lines.next().unwrap().to_string();
    let rows = lines
        .map(|l| l.split(',').map(|x| x.parse::<f64>().unwrap()).collect())
        .collect();
    (header, rows)
}

#[test]
fn recorded_histories_written_as_csv_read_back_to_the_same_doubles() {
    let dir = Scratch::new("record");
    let mut model = chain_model();
    let mut state = State::new(0.0, vec![0.0; 6], vec![0.0, 0.0, 0.0, 0.0, 0.0, 0.3]).unwrap();
    let mut cd =
        CentralDifference::new(&mut model, &mut state, CentralDifferenceOptions::default())
            .unwrap();
    let mut opts = RunOptions::new(0.5, StepControl::Fixed(0.01));
    opts.record = {
        let mut o = RecordOptions::default();
        o.dofs = Some(vec![5, 2]);
        o.every = 7;
        o.velocity = true;
        o.acceleration = true;
        o.energy = true;
        o
    };
    let out = run(&mut cd, &mut model, &mut state, &opts, |_| Flow::Continue)
        .unwrap()
        .into_result()
        .unwrap();
    let rec = &out.record;
    assert!(rec.len() > 3);

    let p = dir.path("history.csv");
    write_record_csv(&p, rec, true, true).unwrap();
    let (header, rows) = read_back(&fs::read_to_string(&p).unwrap());
    assert_eq!(header, "time,u_5,u_2,v_5,v_2,a_5,a_2");
    assert_eq!(rows.len(), rec.len());
    for (r, row) in rows.iter().enumerate() {
        let expected: Vec<f64> = std::iter::once(rec.times[r])
            .chain(rec.u[2 * r..2 * r + 2].iter().copied())
            .chain(rec.v[2 * r..2 * r + 2].iter().copied())
            .chain(rec.a[2 * r..2 * r + 2].iter().copied())
            .collect();
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(row), bits(&expected), "row {r}");
    }
    write_record_csv(&p, rec, false, true).unwrap();
    let (header, rows) = read_back(&fs::read_to_string(&p).unwrap());
    assert_eq!(header, "time,u_5,u_2,a_5,a_2");
    assert_eq!(rows[1][3].to_bits(), rec.a[2].to_bits());

    let p = dir.path("energy.csv");
    write_energy_csv(&p, &rec.energy).unwrap();
    let (header, rows) = read_back(&fs::read_to_string(&p).unwrap());
    assert_eq!(header, ENERGY_HEADER);
    assert_eq!(rows.len(), rec.energy.len());
    for (row, s) in rows.iter().zip(&rec.energy) {
        let expected = [
            s.t,
            s.kinetic,
            s.internal,
            s.external,
            s.damping,
            s.constraint,
            s.extra,
            s.balance_error,
            s.relative_balance_error,
        ];
        for (a, b) in row.iter().zip(expected) {
            assert_eq!(a.to_bits(), b.to_bits());
        }
    }
    assert_eq!(dir.entries(), vec!["energy.csv", "history.csv"]);
}

#[test]
fn asking_for_unrecorded_columns_is_refused_and_writes_nothing() {
    let dir = Scratch::new("record-refuse");
    let mut model = chain_model();
    let mut state = State::at_rest(6, 0.0);
    let mut cd =
        CentralDifference::new(&mut model, &mut state, CentralDifferenceOptions::default())
            .unwrap();
    let opts = RunOptions::new(0.05, StepControl::Fixed(0.01));
    let out = run(&mut cd, &mut model, &mut state, &opts, |_| Flow::Continue)
        .unwrap()
        .into_result()
        .unwrap();
    let p = dir.path("history.csv");
    let e = write_record_csv(&p, &out.record, true, false).unwrap_err();
    assert!(
        matches!(e, Error::DimensionMismatch { found: 0, .. }),
        "{e}"
    );
    assert!(e.to_string().contains("RecordOptions::velocity"), "{e}");
    assert!(dir.entries().is_empty());
    write_record_csv(&p, &out.record, false, false).unwrap();
    let (header, rows) = read_back(&fs::read_to_string(&p).unwrap());
    assert_eq!(header, "time,u_0,u_1,u_2,u_3,u_4,u_5");
    assert_eq!(rows.len(), out.record.len());
}

// ---------------------------------------------------------------------------------------------
// Checkpoints

/// A run of the chain to step 40, with its state and ledger, and the run continued to step 80.
fn chain_run() -> (State, EnergyLedger, State, EnergyLedger) {
    let dt = 0.01;
    let mut model = chain_model();
    let mut state = State::new(0.0, vec![0.0; 6], vec![0.0, 0.0, 0.0, 0.0, 0.0, 0.3]).unwrap();
    let mut cd =
        CentralDifference::new(&mut model, &mut state, CentralDifferenceOptions::default())
            .unwrap();
    let mut half = None;
    for k in 0..80 {
        if k == 40 {
            half = Some((state.clone(), cd.energy().clone()));
        }
        cd.step(&mut model, &mut state, dt).unwrap();
    }
    let (s, l) = half.unwrap();
    (s, l, state, cd.energy().clone())
}

fn state_bits(s: &State) -> Vec<u64> {
    std::iter::once(s.t)
        .chain(s.u.iter().copied())
        .chain(s.v.iter().copied())
        .chain(s.a.iter().copied())
        .map(f64::to_bits)
        .collect()
}

fn checkpoint() -> Checkpoint {
    let (state, ledger, _, _) = chain_run();
    Checkpoint::new(
        "central difference, dt = 0.01, lumped mass",
        state,
        ledger,
        serde_json::json!({"t_end": 0.8, "dt": 0.01}),
    )
}

#[test]
fn a_checkpoint_round_trips_exactly_and_a_run_resumed_from_it_is_bit_identical() {
    let dir = Scratch::new("ckpt");
    let c = checkpoint();
    assert_eq!(c.format_version, CHECKPOINT_FORMAT_VERSION);
    let p = dir.path("run.ckpt");
    write_checkpoint(&p, &c).unwrap();
    let back = read_checkpoint(&p).unwrap();
    assert_eq!(state_bits(&back.state), state_bits(&c.state));
    assert_eq!(back, c); // ledger (with its pending terms), scheme and extra too
    // Resume from the file: bit-identical to the uninterrupted run.
    let (_, _, full, full_ledger) = chain_run();
    let mut model = chain_model();
    let mut state = back.state;
    let mut cd = CentralDifference::resume(
        &mut model,
        &state,
        back.ledger,
        CentralDifferenceOptions::default(),
    )
    .unwrap();
    for _ in 40..80 {
        cd.step(&mut model, &mut state, 0.01).unwrap();
    }
    assert_eq!(state_bits(&state), state_bits(&full));
    assert_eq!(cd.energy(), &full_ledger);
    assert_eq!(dir.entries(), vec!["run.ckpt"]);
}

#[test]
fn damaged_checkpoints_are_refused_whole() {
    let dir = Scratch::new("ckpt-damage");
    let p = dir.path("run.ckpt");
    write_checkpoint(&p, &checkpoint()).unwrap();
    let good = fs::read(&p).unwrap();
    let bad = dir.path("bad.ckpt");
    let refused = |bytes: &[u8]| {
        fs::write(&bad, bytes).unwrap();
        match read_checkpoint(&bad) {
            Err(
                e @ (Error::CheckpointCorrupt { .. }
                | Error::CheckpointHeader { .. }
                | Error::CheckpointVersion { .. }),
            ) => {
                assert!(e.to_string().contains("bad.ckpt"), "{e}");
            }
            other => panic!("not refused: {other:?}"),
        }
    };
    // Truncation at several lengths: inside the header, at its end, inside the content, one
    // byte short.
    let n = good.len();
    for len in [0, 1, 10, 30, 50, n / 3, n / 2, n - 2, n - 1] {
        refused(&good[..len]);
    }
    // A flipped byte anywhere (every 5th byte, and the first and last ones).
    for pos in (0..n).step_by(5).chain([n - 1]) {
        let mut b = good.clone();
        b[pos] ^= 0x04;
        refused(&b);
    }
    // Trailing bytes, another file's content.
    let mut b = good.clone();
    b.extend_from_slice(b"more");
    refused(&b);
    refused(b"%%MatrixMarket matrix coordinate real general\n");
    // Intact files with another first word in the header (a checkpoint of another program, or one
    // written before the header took its present form; the words here are made up): refused,
    // and the message names the header expected.
    let nl = good.iter().position(|&b| b == b'\n').unwrap();
    let rest = std::str::from_utf8(&good[..nl])
        .unwrap()
        .split_once(' ')
        .unwrap()
        .1;
    for word in [
        "other-checkpoint",
        "checkpoint",
        "STEPGAUGE-CHECKPOINT",
        "\u{1b}[1m",
    ] {
        let mut b = format!("{word} {rest}").into_bytes();
        b.extend_from_slice(&good[nl..]);
        refused(&b);
        let e = read_checkpoint(&bad).unwrap_err();
        assert!(matches!(e, Error::CheckpointHeader { .. }), "{e:?}");
        let e = e.to_string();
        assert!(
            e.contains("expected the header `stepgauge-checkpoint v2 <length> <crc32>`"),
            "{e}"
        );
        assert!(!e.contains('\u{1b}'), "control characters are escaped: {e}");
    }
    refused(&good.iter().map(|_| b' ').collect::<Vec<_>>());
    // The good one still reads.
    assert!(read_checkpoint(&p).is_ok());
}

#[test]
fn a_failed_checkpoint_write_leaves_the_old_file_and_no_scratch_file() {
    let dir = Scratch::new("ckpt-fail");
    let p = dir.path("run.ckpt");
    let c = checkpoint();
    write_checkpoint(&p, &c).unwrap();
    let before = fs::read(&p).unwrap();
    // Into a directory that does not exist.
    let missing = dir.path("no/such/dir/run.ckpt");
    let e = write_checkpoint(&missing, &c).unwrap_err();
    assert!(matches!(e, Error::Io { .. }), "{e}");
    // Onto a directory.
    let sub = dir.path("sub");
    fs::create_dir(&sub).unwrap();
    let e = write_checkpoint(&sub, &c).unwrap_err();
    assert!(matches!(e, Error::Io { .. }), "{e}");
    // A state JSON cannot carry: refused before anything is written.
    let mut broken = c.clone();
    broken.state.u[3] = f64::NAN;
    let e = write_checkpoint(&p, &broken).unwrap_err();
    assert!(matches!(e, Error::NonFiniteInput { index: 3, .. }), "{e}");
    assert_eq!(fs::read(&p).unwrap(), before);
    assert_eq!(dir.entries(), vec!["run.ckpt", "sub"]);
    assert!(fs::read_dir(&sub).unwrap().next().is_none());
}

// ---------------------------------------------------------------------------------------------
// Fuzzing: the parsers return Ok or Err on any input, never panic.

const VALID_MM: &str = "%%MatrixMarket matrix coordinate real symmetric\n% comment\n4 4 6\n\
                        1 1 2.5\n2 1 -1\n2 2 2\n3 3 1e-3\n4 3 -7\n4 4 4\n";
const VALID_LOAD: &str = "# loads\ntime,0,3,1\n0,0,0,0\n0.5,1e3,-2,0.25\n\n1,0,4,1\n2.5,1,1,1\n";
const VALID_INITIAL: &str = "dof,u,v\n0,0.5,0\n# c\n3,-1e-2,2\n2,0,1.5\n";

/// One edit of a text.
#[derive(Debug, Clone)]
enum Mutation {
    /// Delete line `k % lines`.
    DeleteLine(usize),
    /// Replace character `k % chars` by the character.
    Replace(usize, char),
    /// Insert the character at character `k % (chars + 1)`.
    Insert(usize, char),
    /// Keep only the first `k % (chars + 1)` characters.
    Truncate(usize),
    /// Duplicate line `k % lines`.
    DuplicateLine(usize),
}

fn mutation() -> impl Strategy<Value = Mutation> {
    // Characters that matter to the parsers, and any character at all.
    let ch = prop_oneof![
        prop::sample::select(vec![
            '0', '1', '9', '-', '+', '.', 'e', 'E', ',', ' ', '\n', '\r', '%', '#', '\t', 'n', 'i',
        ]),
        any::<char>(),
    ];
    prop_oneof![
        any::<usize>().prop_map(Mutation::DeleteLine),
        (any::<usize>(), ch.clone()).prop_map(|(k, c)| Mutation::Replace(k, c)),
        (any::<usize>(), ch).prop_map(|(k, c)| Mutation::Insert(k, c)),
        any::<usize>().prop_map(Mutation::Truncate),
        any::<usize>().prop_map(Mutation::DuplicateLine),
    ]
}

fn mutate(text: &str, edits: &[Mutation]) -> String {
    let mut s = text.to_string();
    for m in edits {
        let chars: Vec<char> = s.chars().collect();
        let lines: Vec<&str> = s.split('\n').collect();
        s = match *m {
            Mutation::DeleteLine(k) => {
                let k = k % lines.len();
                let kept: Vec<&str> = lines
                    .iter()
                    .enumerate()
                    .filter(|&(i, _)| i != k)
                    .map(|(_, l)| *l)
                    .collect();
                kept.join("\n")
            }
            Mutation::DuplicateLine(k) => {
                let k = k % lines.len();
                let mut v = lines.clone();
                v.insert(k, lines[k]);
                v.join("\n")
            }
            Mutation::Replace(k, c) if !chars.is_empty() => {
                let mut v = chars;
                let k = k % v.len();
                v[k] = c;
                v.into_iter().collect()
            }
            Mutation::Replace(..) => s,
            Mutation::Insert(k, c) => {
                let mut v = chars;
                let k = k % (v.len() + 1);
                v.insert(k, c);
                v.into_iter().collect()
            }
            Mutation::Truncate(k) => chars[..k % (chars.len() + 1)].iter().collect(),
        };
    }
    s
}

/// Feeds a text to every parser; any result is fine, a panic fails the test.
fn parse_all(text: &str) {
    if let Ok(m) = parse_matrix_market(text, "fuzz.mtx") {
        assert_eq!(m.indptr().len(), m.rows() + 1);
    }
    if let Ok(t) = parse_load_table(text, "fuzz.csv") {
        assert!(!t.dofs().is_empty());
    }
    for n in [0, 4] {
        if let Ok((u, v)) = parse_initial(text, "fuzz.csv", n) {
            assert_eq!((u.len(), v.len()), (n, n));
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 512, ..ProptestConfig::default() })]

    #[test]
    fn parsers_survive_random_text(text in "\\PC{0,300}") {
        parse_all(&text);
    }

    #[test]
    fn parsers_survive_random_text_after_a_valid_header(
        body in prop::collection::vec(
            prop_oneof![
                // Entry-like lines: `i j value`, `t,x,y`, `dof,u,v`, with any small index and a
                // number-like token.
                (0..6usize, 0..6usize, "[0-9.eE+\\-naifNI]{1,6}", prop::sample::select(vec![" ", ","]))
                    .prop_map(|(i, j, v, sep)| format!("{i}{sep}{j}{sep}{v}")),
                "[0-9 .eE+\\-%#,\\r\\tnaifNI]{0,30}",
            ],
            0..8,
        ).prop_map(|lines| lines.join("\n")),
        which in 0..5usize,
    ) {
        let header = [
            "%%MatrixMarket matrix coordinate real general\n",
            "%%MatrixMarket matrix coordinate real general\n4 4 3\n",
            "%%MatrixMarket matrix coordinate integer symmetric\n4 4 3\n",
            "time,0,1\n",
            "dof,u,v\n",
        ][which];
        parse_all(&format!("{header}{body}"));
    }

    #[test]
    fn parsers_survive_mutations_of_valid_files(
        edits in prop::collection::vec(mutation(), 1..6),
        which in 0..3usize,
    ) {
        let valid = [VALID_MM, VALID_LOAD, VALID_INITIAL][which];
        parse_all(&mutate(valid, &edits));
    }
}

#[test]
fn the_fuzzed_valid_files_are_valid() {
    let m = parse_matrix_market(VALID_MM, "v.mtx").unwrap();
    assert_eq!(m.nnz(), 8); // 6 stored, 2 of them mirrored
    assert_eq!(
        parse_load_table(VALID_LOAD, "v.csv").unwrap().dofs(),
        &[0, 3, 1]
    );
    let (u, v) = parse_initial(VALID_INITIAL, "v.csv", 4).unwrap();
    assert_eq!((u[3], v[2]), (-1e-2, 1.5));
}
