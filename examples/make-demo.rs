//! Regenerates the bundled demo recording, `replays/demo.tvrec`, from the
//! simulator and the embedded demo plan. Run from the repository root:
//! `cargo run --release --example make-demo`.

fn main() -> std::io::Result<()> {
    let path = std::path::Path::new("replays").join(termvel::sim::demo::DEMO_FILE);
    let file = std::io::BufWriter::new(std::fs::File::create(&path)?);
    let n = termvel::sim::demo::write_demo_recording(file)?;
    eprintln!("wrote {} events to {}", n, path.display());
    Ok(())
}
