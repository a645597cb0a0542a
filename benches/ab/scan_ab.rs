//! Paired A/B timing of the sweep-log number scanner, outside cargo.
//!
//! Kept in a subfolder of `benches/` so that cargo does not build it as a bench target
//! (it needs the two copies below, which exist only while comparing).
//!
//! Two versions of `src/log/number.rs` are compiled into one program and timed on the
//! cells of one log, alternating which goes first, round after round; the median of the
//! per-round time ratios cancels most of the drift of a loaded machine. Each row is read
//! the way `FastRow::parse` reads a plain row: four cells, delimiter after each but the
//! last, the last ending at the line end (line ends are found once, before timing).
//!
//! ```sh
//! git show REV:src/log/number.rs > benches/ab/number_old.rs   # the version to compare with
//! cp src/log/number.rs benches/ab/number_new.rs
//! mkdir -p target/ab && rustc -O --edition 2021 benches/ab/scan_ab.rs -o target/ab/scan_ab
//! target/ab/scan_ab LOG.csv 41   # any plain four-column log, e.g. one from `magproof simulate`
//! rm benches/ab/number_old.rs benches/ab/number_new.rs
//! ```
//!
//! The two copies sit beside this file (`#[path]` is relative to it) and are not
//! committed.

#![allow(dead_code)]
#[path = "number_new.rs"]
mod number_new;
#[path = "number_old.rs"]
mod number_old;

use std::hint::black_box;
use std::time::Instant;

macro_rules! rows {
    ($name:ident, $module:ident) => {
        fn $name(data: &[u8], ends: &[usize]) -> (f64, usize) {
            let (mut sum, mut rows, mut pos) = (0.0, 0, 0);
            for &end in ends {
                let text = &data[pos..end];
                let mut p = 0;
                for k in 0..4 {
                    match $module::scan_decimal(text, p) {
                        $module::Scan::Value(v, e) => {
                            sum += v;
                            p = e;
                        }
                        _ => panic!("not a plain row at byte {pos}"),
                    }
                    if k < 3 {
                        assert_eq!(text.get(p), Some(&b','), "byte {pos}");
                        p += 1;
                    } else {
                        assert_eq!(p, text.len(), "byte {pos}");
                    }
                }
                rows += 1;
                pos = end + 1;
            }
            (sum, rows)
        }
    };
}
rows!(rows_old, number_old);
rows!(rows_new, number_new);

fn main() {
    let mut args = std::env::args().skip(1);
    let path = args.next().expect("usage: scan_ab LOG [ROUNDS]");
    let rounds: usize = args.next().map_or(41, |s| s.parse().expect("rounds"));
    let all = std::fs::read(&path).expect("read log");
    let first = all.iter().position(|&c| c == b'\n').expect("header") + 1;
    let data = &all[first..];
    let ends: Vec<usize> = (0..data.len()).filter(|&i| data[i] == b'\n').collect();
    let (a, n) = rows_old(data, &ends);
    let (b, m) = rows_new(data, &ends);
    assert_eq!(
        (a.to_bits(), n),
        (b.to_bits(), m),
        "the two versions disagree"
    );
    let time = |f: fn(&[u8], &[usize]) -> (f64, usize)| {
        let t = Instant::now();
        black_box(f(black_box(data), &ends));
        t.elapsed().as_secs_f64()
    };
    let (mut old, mut new, mut ratio) = (Vec::new(), Vec::new(), Vec::new());
    for r in 0..rounds {
        let (o, w) = if r % 2 == 0 {
            let o = time(rows_old);
            (o, time(rows_new))
        } else {
            let w = time(rows_new);
            (time(rows_old), w)
        };
        old.push(o);
        new.push(w);
        ratio.push(w / o);
    }
    for v in [&mut old, &mut new, &mut ratio] {
        v.sort_by(f64::total_cmp);
    }
    let ns = 1e9 / (4 * n) as f64;
    let h = rounds / 2;
    println!(
        "{rounds} rounds, {} cells: old min {:.2} median {:.2} ns/cell; new min {:.2} median {:.2} ns/cell; new/old median {:.3} (quartiles {:.3}-{:.3})",
        4 * n,
        old[0] * ns,
        old[h] * ns,
        new[0] * ns,
        new[h] * ns,
        ratio[h],
        ratio[rounds / 4],
        ratio[3 * rounds / 4]
    );
}
