//! Signed releases: the device verifier against RFC 8032's test vectors, and a signed
//! demo blob through the host signer and the device loader: the threshold forgery with a
//! recomputed CRC, every single-bit flip, another key's blob and an unsigned blob are all
//! refused by a device that requires a signature, which then holds NO-GO.

use firmware::{Classifier, DecodeError, ReleaseKey};
use host_trainer::release::sign;
use shared_model::blob;

fn unhex(s: &str) -> Vec<u8> {
    (0..s.len() / 2)
        .map(|i| u8::from_str_radix(&s[2 * i..2 * i + 2], 16).unwrap())
        .collect()
}

#[test]
fn the_device_verifier_passes_rfc_8032_test_vectors() {
    // Source: RFC 8032, "Edwards-Curve Digital Signature Algorithm (EdDSA)", section 7.1,
    // TEST 1, TEST 2, TEST 3 (public key, message, signature).
    let vectors = [
        (
            "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a",
            "",
            "e5564300c360ac729086e2cc806e828a84877f1eb8e5d974d873e065224901555fb8821590a33bacc61e39701cf9b46bd25bf5f0595bbe24655141438e7a100b",
        ),
        (
            "3d4017c3e843895a92b70aa74d1b7ebc9c982ccf2ec4968cc0cd55f12af4660c",
            "72",
            "92a009a9f0d4cab8720e820b5f642540a2b27b5416503f8fb3762223ebdb69da085ac1e43e15996e458f3613d0f11d8c387b2eaeb4302aeeb00d291612bb0c00",
        ),
        (
            "fc51cd8e6218a1a38da47ed00230f0580816ed13ba3303ac5deb911548908025",
            "af82",
            "6291d657deec24024827e69c3abe01a30ce548a284743a445e3680d7db5ac3ac18ff9b538d16f290ae67f760984dc6594a7c15e9716ed28dc027beceea1ec40a",
        ),
    ];
    for (pk, msg, sig) in vectors {
        let key = ReleaseKey::from_bytes(&unhex(pk).try_into().unwrap()).unwrap();
        let mut sig: [u8; 64] = unhex(sig).try_into().unwrap();
        assert_eq!(key.verify_bytes(&unhex(msg), &sig), Ok(()));
        sig[0] ^= 1;
        assert_eq!(
            key.verify_bytes(&unhex(msg), &sig),
            Err(DecodeError::BadSignature)
        );
    }
}

#[test]
fn a_signed_blob_loads_and_every_forgery_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    host_trainer::demo::run(&dir.path().join("d"), false).unwrap();
    let plain = std::fs::read(dir.path().join("d/model.lgmb")).unwrap();
    let model = blob::decode::<shared_model::Readings>(&plain).unwrap();
    let owner = ed25519_dalek::SigningKey::from_bytes(&[42u8; 32]);
    let device_key = ReleaseKey::from_bytes(owner.verifying_key().as_bytes()).unwrap();
    assert_eq!(
        device_key.id(),
        sign::key_id(&owner.verifying_key()),
        "host and device agree on the key id"
    );
    let signed = sign::signed_blob(&model, &owner);
    assert_eq!(signed.len(), plain.len() + blob::SIGNATURE_SECTION_LEN);
    assert_eq!(sign::signed_blob(&model, &owner), signed, "deterministic");
    // Accepted, and it decides as the unsigned blob does.
    let c = Classifier::from_flash_signed(&signed, &device_key).unwrap();
    assert_eq!(c.model(), &model);
    assert_eq!(c.key_id(), Some(device_key.id()));
    // Erased flash after the blob is ignored, as for unsigned blobs.
    let mut region = signed.clone();
    region.resize(4096, 0xFF);
    assert!(Classifier::from_flash_signed(&region, &device_key).is_ok());
    // The threshold forgery: every unit GO, CRC recomputed, the old signature kept.
    let mut m = model.model().clone();
    m.nogo_max = i64::MIN;
    m.go_min = i64::MIN + 1;
    let forged_model = shared_model::CheckedModel::new(m).unwrap();
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode_for_signing(&forged_model, device_key.id(), &mut buf).unwrap();
    buf[n..n + 64].copy_from_slice(&signed[signed.len() - 64..]);
    let forged = &buf[..n + 64];
    assert!(
        blob::decode::<shared_model::Readings>(forged).is_ok(),
        "the forgery is a well-formed blob"
    );
    assert_eq!(
        Classifier::from_flash_signed(forged, &device_key),
        Err(DecodeError::BadSignature)
    );
    assert_eq!(
        sign::verify(forged, &owner.verifying_key()),
        Err(sign::SignatureError::Bad)
    );
    // Every single-bit flip of the signed blob.
    for byte in 0..signed.len() {
        for bit in 0..8 {
            let mut b = signed.clone();
            b[byte] ^= 1 << bit;
            assert!(
                Classifier::from_flash_signed(&b, &device_key).is_err(),
                "flip {byte}:{bit} accepted"
            );
        }
    }
    // Another key's blob, and an unsigned blob.
    let other = sign::signed_blob(&model, &ed25519_dalek::SigningKey::from_bytes(&[7u8; 32]));
    assert_eq!(
        Classifier::from_flash_signed(&other, &device_key),
        Err(DecodeError::UnknownKey)
    );
    assert_eq!(
        Classifier::from_flash_signed(&plain, &device_key),
        Err(DecodeError::Unsigned)
    );
    // A firmware without a key still loads both, as before.
    assert!(Classifier::from_flash(&plain).is_ok() && Classifier::from_flash(&signed).is_ok());
}
