//! Release key files on the command line: a private key others may read signs nothing, a
//! key file with two keys or a key id that is not its key's is refused, and `key new`
//! writes the TOML layout (README, "Signed releases").

use std::os::unix::fs::PermissionsExt;
use std::path::Path;

use crate::common::{demo, exits, linegate, on_demo};

fn chmod(p: &Path, mode: u32) {
    std::fs::set_permissions(p, std::fs::Permissions::from_mode(mode)).unwrap();
}

/// `pack` of the demo's model signed with `key`, into `out`.
fn sign_with(d: &Path, key: &str, out: &str) -> std::process::Output {
    linegate(
        &on_demo(
            "pack",
            &[
                "--apply-suggested-band",
                "--apply-recommended-format",
                "--sign",
                key,
                "-o",
                out,
            ],
        ),
        d,
    )
}

#[test]
fn a_private_key_others_can_read_or_holding_two_keys_signs_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    exits(&linegate(&["-q", "key", "new", "-o", "owner"], d), 0);
    let key = d.join("owner.key");
    assert_eq!(
        std::fs::metadata(&key).unwrap().permissions().mode() & 0o777,
        0o600
    );
    exits(&sign_with(d, "owner.key", "ok.lgmb"), 0);
    for mode in [0o644, 0o640, 0o604, 0o620] {
        chmod(&key, mode);
        let err = exits(&sign_with(d, "owner.key", "open.lgmb"), 2);
        assert!(
            err.contains("owner.key")
                && err.contains(&format!("{mode:o}"))
                && err.contains("chmod 600"),
            "{mode:o}: {err}"
        );
        assert!(!d.join("open.lgmb").exists());
    }
    // A file of the older layout with two private keys: which one signs is not clear.
    let two = d.join("two.key");
    std::fs::write(
        &two,
        format!(
            "linegate release key, PRIVATE\ned25519-secret {}\ned25519-secret {}\n",
            "11".repeat(32),
            "22".repeat(32)
        ),
    )
    .unwrap();
    chmod(&two, 0o600);
    let err = exits(&sign_with(d, "two.key", "two.lgmb"), 2);
    assert!(
        err.contains("two.key") && err.contains("line 2 and line 3"),
        "{err}"
    );
    assert!(!d.join("two.lgmb").exists());
}

#[test]
fn a_public_key_file_whose_key_id_is_not_its_keys_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    exits(&linegate(&["-q", "key", "new", "-o", "owner"], d), 0);
    exits(&sign_with(d, "owner.key", "signed.lgmb"), 0);
    let text = std::fs::read_to_string(d.join("owner.pub")).unwrap();
    // The file `key new` wrote: the TOML layout (or the older lines, read the same).
    let field = |name: &str, old: &str| {
        text.lines()
            .find_map(|l| {
                l.strip_prefix(&format!("{name} = \""))
                    .or_else(|| l.strip_prefix(old))
            })
            .unwrap()
            .trim_end_matches('"')
            .to_string()
    };
    let (public, id) = (
        field("public_key", "ed25519-public "),
        field("key_id", "key-id "),
    );
    let other = "0123456789abcdef";
    // Both layouts: the new one edited, and the older one written as `key new` wrote it.
    std::fs::write(d.join("new.pub"), text.replace(&id, other)).unwrap();
    std::fs::write(
        d.join("old.pub"),
        format!("linegate release key, public\ned25519-public {public}\nkey-id {other}\n"),
    )
    .unwrap();
    std::fs::write(
        d.join("old-good.pub"),
        format!("linegate release key, public\ned25519-public {public}\nkey-id {id}\n"),
    )
    .unwrap();
    for f in ["new.pub", "old.pub"] {
        let err = exits(
            &linegate(&["inspect", "signed.lgmb", "--public-key", f], d),
            2,
        );
        assert!(
            err.contains(f) && err.contains(other) && err.contains(&id),
            "{f}: {err}"
        );
    }
    for f in ["owner.pub", "old-good.pub"] {
        exits(
            &linegate(&["inspect", "signed.lgmb", "--public-key", f], d),
            0,
        );
    }
}
