//! Print the stdlib benchmark records as JSON lines (the kernel's
//! `icefield bench --json` does the same through `icefield_stdlib::bench`).
//! Usage: `cargo run --release -p icefield-stdlib --example bench_flips [NAME...]`

use icefield_stdlib::bench;
use icefield_stdlib::control::Interrupt;

fn main() {
    let requested: Vec<String> = std::env::args().skip(1).collect();
    let names: Vec<String> = if requested.is_empty() {
        bench::names().iter().map(|s| s.to_string()).collect()
    } else {
        requested
    };
    let interrupt = Interrupt::new();
    for name in names {
        match bench::run(&name, &interrupt) {
            Some(records) => {
                for r in records {
                    match serde_json::to_string(&r) {
                        Ok(line) => println!("{line}"),
                        Err(e) => eprintln!("cannot serialise {name}: {e}"),
                    }
                }
            }
            None => eprintln!("unknown benchmark '{name}'; known: {:?}", bench::names()),
        }
    }
}
