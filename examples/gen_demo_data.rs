//! Regenerate the committed demo data in `demo-data/` from the built-in generator.
//! Run from the repository root: `cargo run --release --example gen_demo_data`.

fn main() {
    for (rel, text) in sworn::demo::data_files() {
        let path = std::path::Path::new(rel);
        if let Some(parent) = path.parent() {
            if let Err(e) = std::fs::create_dir_all(parent) {
                eprintln!("error: {}: {e}", parent.display());
                std::process::exit(2);
            }
        }
        if let Err(e) = sworn::ledger::write_atomic(path, text.as_bytes()) {
            eprintln!("error: {e}");
            std::process::exit(2);
        }
        println!("wrote {rel}");
    }
}
