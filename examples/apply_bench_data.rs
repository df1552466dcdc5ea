//! Writes the generated score file of `scripts/bench_apply.sh`:
//! `apply_bench_data ROWS PATH` → CSV with columns id, score, label
//! (probability scores with full double precision, labels drawn from a
//! distorted version of the score). Invented data, for timing only.

use std::io::Write;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if args.len() != 3 {
        eprintln!("usage: apply_bench_data ROWS PATH");
        std::process::exit(2);
    }
    let rows: u64 = args[1].parse().expect("ROWS must be a whole number");
    let f = std::fs::File::create(&args[2]).expect("cannot create PATH");
    let mut w = std::io::BufWriter::with_capacity(1 << 20, f);
    writeln!(w, "id,score,label").unwrap();
    let mut state = 0x5EED_u64 ^ rows;
    let mut next = || {
        state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        plumbline::split::splitmix64(state)
    };
    let mut buf = ryu::Buffer::new();
    for i in 0..rows {
        let u = (next() >> 11) as f64 / (1u64 << 53) as f64;
        let v = (next() >> 11) as f64 / (1u64 << 53) as f64;
        let q = 0.01 + 0.98 * u;
        let label = (v < q.sqrt()) as u8;
        writeln!(w, "{i},{},{label}", buf.format(q * q)).unwrap();
    }
    w.flush().unwrap();
}
