//! Faults: a `stepgauge run` killed (SIGKILL) at a pseudo-random moment and resumed from the
//! checkpoint it left gives a bit-identical history and final state; a kill during a checkpoint
//! write never leaves a checkpoint that loads half-written; a checkpoint truncated at any length
//! or with any single bit flipped is refused whole.
//!
//! Also tested elsewhere: damaged checkpoints at selected lengths and bytes and a failed write
//! (`tests/io.rs`), resume through the command line without a kill (`tests/cli_run.rs`), Newton
//! failure at the smallest step (`tests/implicit_nonlinear.rs`), the instability guard
//! (`tests/explicit_sdof.rs`).

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use stepgauge::Error;
use stepgauge::io::{Checkpoint, read_checkpoint};

/// A unique scratch directory, removed when dropped.
struct Scratch(PathBuf);

impl Scratch {
    fn new(name: &str) -> Self {
        let dir = std::env::temp_dir().join(format!(
            "stepgauge-faults-{name}-{}-{:?}",
            std::process::id(),
            std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map(|d| d.as_nanos())
                .unwrap_or(0)
        ));
        std::fs::create_dir_all(&dir).expect("scratch directory");
        Scratch(dir)
    }

    fn path(&self, name: &str) -> PathBuf {
        self.0.join(name)
    }

    /// Names of the files in the directory that start with `prefix`.
    fn files_starting(&self, prefix: &str) -> Vec<String> {
        std::fs::read_dir(&self.0)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n.starts_with(prefix))
            .collect()
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// A fixed-fixed chain of `n` unit masses and springs of 100 (`omega_max < 20`, stable step
/// above 0.1), loaded at its last DOF by a ramp to 10 over the first second.
fn chain_files(s: &Scratch, n: usize) -> (PathBuf, PathBuf, PathBuf) {
    let mut m = format!("%%MatrixMarket matrix coordinate real symmetric\n{n} {n} {n}\n");
    let mut k = format!(
        "%%MatrixMarket matrix coordinate real symmetric\n{n} {n} {}\n",
        2 * n - 1
    );
    for i in 1..=n {
        m.push_str(&format!("{i} {i} 1\n"));
        k.push_str(&format!("{i} {i} 200\n"));
        if i < n {
            k.push_str(&format!("{} {i} -100\n", i + 1));
        }
    }
    let (pm, pk, pl) = (s.path("M.mtx"), s.path("K.mtx"), s.path("load.csv"));
    std::fs::write(&pm, m).unwrap();
    std::fs::write(&pk, k).unwrap();
    std::fs::write(&pl, format!("time,{}\n0,0\n1,10\n10000,10\n", n - 1)).unwrap();
    (pm, pk, pl)
}

/// `stepgauge run` on the chain to `t_end` with `dt = 0.05`, recording three DOFs every 10 steps.
fn run_command(files: &(PathBuf, PathBuf, PathBuf), t_end: &str, more: &[&str]) -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_stepgauge"));
    c.arg("run")
        .arg("--mass")
        .arg(&files.0)
        .arg("--stiffness")
        .arg(&files.1)
        .arg("--load")
        .arg(&files.2)
        .args([
            "--scheme",
            "central-difference",
            "--dt",
            "0.05",
            "--t-end",
            t_end,
            "--record",
            "0,50,99",
            "--every",
            "10",
            "--quiet",
        ])
        .args(more)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped());
    c
}

fn run_to_end(mut c: Command) {
    let out = c.output().expect("run stepgauge");
    assert!(
        out.status.success(),
        "stepgauge run failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// The bits of a checkpoint's state and ledger (the ledger through its JSON, which carries every
/// double exactly).
fn checkpoint_bits(c: &Checkpoint) -> (Vec<u64>, u64, String) {
    let s = &c.state;
    let bits = std::iter::once(s.t)
        .chain(s.u.iter().copied())
        .chain(s.v.iter().copied())
        .chain(s.a.iter().copied())
        .map(f64::to_bits)
        .collect();
    (bits, s.step, serde_json::to_string(&c.ledger).unwrap())
}

/// Pseudo-random fractions in `[lo, hi)` from a fixed seed (a 64-bit linear congruential
/// generator, Knuth's MMIX constants), so that the kill moments are the same on every run.
fn fractions(seed: u64, count: usize, lo: f64, hi: f64) -> Vec<f64> {
    let mut x = seed;
    (0..count)
        .map(|_| {
            x = x
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            lo + (hi - lo) * ((x >> 11) as f64 / (1u64 << 53) as f64)
        })
        .collect()
}

/// Kills `c` (SIGKILL) `delay` after its start; returns whether it was still running then.
fn kill_after(mut c: Command, delay: Duration) -> bool {
    let mut child = c.spawn().expect("start stepgauge");
    std::thread::sleep(delay);
    let running = child.try_wait().expect("poll").is_none();
    if running {
        child.kill().expect("SIGKILL");
    }
    let status = child.wait().expect("reap");
    assert!(
        !running || !status.success(),
        "a killed run reported success"
    );
    running
}

/// A run killed at a pseudo-random moment (two moments, 15 to 85 % of an uninterrupted run's
/// wall time) and resumed from the checkpoint on disk records, from the checkpoint on, exactly
/// the rows of the uninterrupted run (text compared: every double printed in its shortest
/// round-trip form), and ends in the same state and energy ledger, bit for bit.
#[test]
fn a_run_killed_at_a_random_step_resumes_bit_identically() {
    let s = Scratch::new("kill");
    let files = chain_files(&s, 100);
    let t_end = "1200"; // 24,000 steps, 1 to 3 s in a debug build
    let (full, full_ck) = (s.path("full.csv"), s.path("full.ckpt"));
    let start = Instant::now();
    run_to_end(run_command(
        &files,
        t_end,
        &[
            "--output",
            full.to_str().unwrap(),
            "--checkpoint",
            full_ck.to_str().unwrap(),
            "--checkpoint-every",
            "100",
        ],
    ));
    let wall = start.elapsed();
    eprintln!("uninterrupted run: {:.2} s", wall.as_secs_f64());
    let full_rows: Vec<String> = std::fs::read_to_string(&full)
        .unwrap()
        .lines()
        .map(str::to_string)
        .collect();
    let full_end = read_checkpoint(&full_ck).unwrap();

    for (i, f) in fractions(0x5eed_0001, 2, 0.15, 0.85)
        .into_iter()
        .enumerate()
    {
        let (ck, a, b, b_ck) = (
            s.path(&format!("k{i}.ckpt")),
            s.path(&format!("k{i}-a.csv")),
            s.path(&format!("k{i}-b.csv")),
            s.path(&format!("k{i}-end.ckpt")),
        );
        let killed_run = || {
            run_command(
                &files,
                t_end,
                &[
                    "--output",
                    a.to_str().unwrap(),
                    "--checkpoint",
                    ck.to_str().unwrap(),
                    "--checkpoint-every",
                    "100",
                ],
            )
        };
        let mut killed = kill_after(killed_run(), wall.mul_f64(f));
        // A kill before the first checkpoint leaves none (which is right); on a loaded machine
        // that can happen at 15 % of the reference wall time: kill later.
        let mut later = f;
        while !ck.exists() && killed {
            later = (later + 1.0) / 2.0;
            assert!(
                later < 0.99,
                "no checkpoint written before {:.0} % of the run",
                100.0 * later
            );
            killed = kill_after(killed_run(), wall.mul_f64(later));
        }
        let left = read_checkpoint(&ck).expect("the checkpoint left by the killed run loads");
        if !killed {
            // The run ended before the kill (a much faster machine): its end is the full run's.
            assert_eq!(checkpoint_bits(&left), checkpoint_bits(&full_end));
            continue;
        }
        assert!(
            left.state.step > 0 && left.state.step.is_multiple_of(100),
            "step {}",
            left.state.step
        );
        assert!(!a.exists(), "the killed run wrote its history");
        run_to_end(run_command(
            &files,
            t_end,
            &[
                "--resume",
                ck.to_str().unwrap(),
                "--output",
                b.to_str().unwrap(),
                "--checkpoint",
                b_ck.to_str().unwrap(),
            ],
        ));
        let resumed: Vec<String> = std::fs::read_to_string(&b)
            .unwrap()
            .lines()
            .map(str::to_string)
            .collect();
        assert_eq!(resumed[0], full_rows[0], "header");
        // The resumed history starts with the checkpoint's row, which the full run recorded
        // (checkpoints every 100 steps, rows every 10).
        let from = full_rows
            .iter()
            .position(|r| *r == resumed[1])
            .unwrap_or_else(|| {
                panic!(
                    "the resumed first row {} is not in the full run",
                    resumed[1]
                )
            });
        assert_eq!(
            &resumed[1..],
            &full_rows[from..],
            "kill {i} at {:.0} % (checkpoint of step {})",
            100.0 * f,
            left.state.step
        );
        let end = read_checkpoint(&b_ck).unwrap();
        assert_eq!(
            checkpoint_bits(&end),
            checkpoint_bits(&full_end),
            "kill {i}"
        );
        eprintln!(
            "kill {i} at {:.0} % of the wall time: resumed from step {} of 24000, {} rows identical",
            100.0 * later,
            left.state.step,
            resumed.len() - 1
        );
        assert_eq!(end.scheme, full_end.scheme);
    }
}

/// With a checkpoint after every step (most of the wall time is then spent writing and syncing
/// checkpoints), runs killed at pseudo-random moments leave a checkpoint that loads, or none at
/// all; never a half-written one (writes go to a scratch file renamed over the checkpoint:
/// `stepgauge::io::write_atomically`). A scratch file left by a kill is never the checkpoint.
#[test]
fn a_kill_during_a_checkpoint_write_never_leaves_a_half_written_checkpoint() {
    let s = Scratch::new("kill-write");
    let files = chain_files(&s, 100);
    let mut left_behind = 0;
    for (i, ms) in fractions(0x5eed_0002, 8, 40.0, 400.0)
        .into_iter()
        .enumerate()
    {
        let ck = s.path(&format!("w{i}.ckpt"));
        let out = s.path(&format!("w{i}.csv"));
        kill_after(
            run_command(
                &files,
                "600",
                &[
                    "--output",
                    out.to_str().unwrap(),
                    "--checkpoint",
                    ck.to_str().unwrap(),
                    "--checkpoint-every",
                    "1",
                ],
            ),
            Duration::from_secs_f64(ms / 1000.0),
        );
        if ck.exists() {
            let c = read_checkpoint(&ck)
                .unwrap_or_else(|e| panic!("kill {i} after {ms:.0} ms: checkpoint refused: {e}"));
            assert!(c.state.step > 0);
        }
        let scratch_files = s.files_starting(&format!(".w{i}.ckpt.tmp-"));
        left_behind += scratch_files.len();
        for t in scratch_files {
            // A scratch file is not read as a checkpoint unless it is complete.
            if let Ok(c) = read_checkpoint(&s.path(&t)) {
                assert!(c.state.step > 0);
            }
        }
    }
    // How many kills landed inside a write (informative: it depends on the machine's speed).
    eprintln!("{left_behind} of 8 kills left a scratch checkpoint file behind");
}

/// Writes a small checkpoint (a 2-DOF run to t = 1) and returns its bytes.
fn small_checkpoint(s: &Scratch) -> Vec<u8> {
    let files = (s.path("M.mtx"), s.path("K.mtx"), s.path("load.csv"));
    std::fs::write(
        &files.0,
        "%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n1 1 2\n2 2 1\n",
    )
    .unwrap();
    std::fs::write(
        &files.1,
        "%%MatrixMarket matrix coordinate real symmetric\n2 2 3\n1 1 6\n2 1 -2\n2 2 4\n",
    )
    .unwrap();
    std::fs::write(&files.2, "time,1\n0,10\n100,10\n").unwrap();
    let ck = s.path("small.ckpt");
    let mut c = Command::new(env!("CARGO_BIN_EXE_stepgauge"));
    c.arg("run")
        .arg("--mass")
        .arg(&files.0)
        .arg("--stiffness")
        .arg(&files.1)
        .arg("--load")
        .arg(&files.2)
        .args(["--dt", "0.1", "--t-end", "1", "--quiet", "--output"])
        .arg(s.path("small.csv"))
        .arg("--checkpoint")
        .arg(&ck)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped());
    run_to_end(c);
    std::fs::read(&ck).unwrap()
}

/// Asserts that `bytes`, written to `path`, are refused whole with an error that names the file.
fn assert_refused(path: &Path, bytes: &[u8], what: &str) {
    std::fs::write(path, bytes).unwrap();
    match read_checkpoint(path) {
        Err(
            e @ (Error::CheckpointCorrupt { .. }
            | Error::CheckpointHeader { .. }
            | Error::CheckpointVersion { .. }),
        ) => {
            let msg = e.to_string();
            assert!(msg.contains("bad.ckpt"), "{what}: {msg}");
        }
        Ok(_) => panic!("{what}: a damaged checkpoint was read"),
        Err(e) => panic!("{what}: refused with an unexpected error: {e}"),
    }
}

/// Every truncation length, and every single bit of every byte flipped, is refused whole with
/// `CheckpointCorrupt` (or `CheckpointHeader` when the flip is in the header's first word, or
/// `CheckpointVersion` when the flip turns the version digit into another number): the header's length and CRC-32 catch every change of the JSON (CRC-32
/// detects every error burst of up to 32 bits, so every single-bit error), and the header
/// itself is parsed strictly. (`tests/io.rs` flips every fifth byte and a few truncation
/// lengths; this is the exhaustive version.)
#[test]
fn every_truncation_and_every_bit_flip_of_a_checkpoint_is_refused() {
    let s = Scratch::new("damage");
    let good = small_checkpoint(&s);
    let bad = s.path("bad.ckpt");
    assert!(read_checkpoint(&s.path("small.ckpt")).is_ok());
    for len in 0..good.len() {
        assert_refused(&bad, &good[..len], &format!("truncated to {len} bytes"));
    }
    for pos in 0..good.len() {
        for bit in 0..8 {
            let mut b = good.clone();
            b[pos] ^= 1 << bit;
            assert_refused(&bad, &b, &format!("bit {bit} of byte {pos} flipped"));
        }
    }
}
