fn main() {
    let d = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/data");
    let sheet = host_trainer::scaling::ChannelSheet::read(&d.join("bench-1000000x16.toml")).unwrap();
    let t = std::time::Instant::now();
    let ds = host_trainer::log::read_log(&d.join("bench-1000000x16.csv"), &Default::default(), host_trainer::log::ScaleFrom::Sheet(&sheet)).unwrap();
    println!("{} rows in {:?}", ds.len(), t.elapsed());
}
