//! The baseline of `scripts/bench_apply.sh`: parse a score file and rewrite
//! it unchanged, with the same reader and writer `plumbline apply` uses
//! (`data::rows::RowSource`, the csv crate's byte records), but no score
//! parsing, no map and no added column. `csv_rewrite IN OUT`.

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if args.len() != 3 {
        eprintln!("usage: csv_rewrite IN OUT");
        std::process::exit(2);
    }
    let mut src = plumbline::data::rows::RowSource::open(std::path::Path::new(&args[1]))
        .unwrap_or_else(|e| panic!("{e}"));
    let f = std::fs::File::create(&args[2]).expect("cannot create OUT");
    let mut wtr = csv::WriterBuilder::new()
        .buffer_capacity(1 << 16)
        .from_writer(std::io::BufWriter::with_capacity(1 << 16, f));
    let header: csv::ByteRecord = src.headers().iter().map(|h| h.as_bytes()).collect();
    wtr.write_byte_record(&header).unwrap();
    let mut rec = csv::ByteRecord::new();
    let mut rows = 0u64;
    while src.next_row(&mut rec).unwrap_or_else(|e| panic!("{e}")) {
        wtr.write_byte_record(&rec).unwrap();
        rows += 1;
    }
    wtr.flush().unwrap();
    eprintln!("{rows} rows rewritten");
}
