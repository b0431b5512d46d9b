//! Ed25519 keys and signatures over commit ids.
//!
//! Knows nothing of SQL or files: the CLI reads key files and hands a [`Signer`] in. A signature
//! is always over the 32 bytes of a commit id, which is itself the BLAKE3 hash of the canonical
//! body, so the signature covers every field of the body.

use ed25519_dalek::{Signature, Signer as _, SigningKey, VerifyingKey};

/// A private signing key.
pub struct Signer {
    key: SigningKey,
}

impl Signer {
    /// A signer from a 32-byte secret seed.
    pub fn from_seed(seed: &[u8; 32]) -> Self {
        Signer {
            key: SigningKey::from_bytes(seed),
        }
    }

    /// The public key.
    pub fn public_key(&self) -> [u8; 32] {
        self.key.verifying_key().to_bytes()
    }

    /// Sign `message` (in emend, always a commit id).
    pub fn sign(&self, message: &[u8]) -> [u8; 64] {
        self.key.sign(message).to_bytes()
    }
}

impl std::fmt::Debug for Signer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "Signer({})", fingerprint(&self.public_key()))
    }
}

/// Whether `signature` is a valid Ed25519 signature of `message` by `public_key`.
///
/// Uses strict verification (rejects small-order keys and non-canonical signatures).
pub fn verify(public_key: &[u8; 32], message: &[u8], signature: &[u8]) -> bool {
    let Ok(sig_bytes) = <[u8; 64]>::try_from(signature) else {
        return false;
    };
    let Ok(key) = VerifyingKey::from_bytes(public_key) else {
        return false;
    };
    key.verify_strict(message, &Signature::from_bytes(&sig_bytes))
        .is_ok()
}

/// A short, readable fingerprint of a public key: the first 16 hex digits of its BLAKE3 hash in
/// groups of four.
pub fn fingerprint(public_key: &[u8; 32]) -> String {
    let hex = crate::hash::Digest::of(public_key).to_hex();
    let groups: Vec<&str> = (0..4).map(|i| &hex[i * 4..i * 4 + 4]).collect();
    groups.join("-")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn hex(s: &str) -> Vec<u8> {
        data_encoding::HEXLOWER_PERMISSIVE
            .decode(s.as_bytes())
            .expect("hex in reference file")
    }

    #[test]
    fn rfc8032_vectors() {
        // Source: RFC 8032 section 7.1 test vectors TEST 1, 2, 3, 1024 and SHA(abc)
        // (tests/reference/ed25519_rfc8032.json).
        let doc = crate::testdata::reference("ed25519_rfc8032.json");
        let cases = doc["cases"].as_array().expect("cases");
        assert!(cases.len() >= 5);
        for case in cases {
            let name = case["name"].as_str().unwrap_or("?");
            let seed: [u8; 32] = hex(case["secret_key"].as_str().unwrap())
                .try_into()
                .expect("32-byte seed");
            let public: [u8; 32] = hex(case["public_key"].as_str().unwrap())
                .try_into()
                .expect("32-byte key");
            let message = hex(case["message"].as_str().unwrap());
            let signature = hex(case["signature"].as_str().unwrap());
            let signer = Signer::from_seed(&seed);
            assert_eq!(signer.public_key(), public, "{name}: public key");
            assert_eq!(
                signer.sign(&message).to_vec(),
                signature,
                "{name}: signature"
            );
            assert!(verify(&public, &message, &signature), "{name}: verifies");
            let mut bad = signature.clone();
            bad[0] ^= 1;
            assert!(
                !verify(&public, &message, &bad),
                "{name}: flipped bit fails"
            );
        }
    }

    #[test]
    fn fingerprint_shape() {
        let f = fingerprint(&[1; 32]);
        assert_eq!(f.len(), 19);
        assert_eq!(f.matches('-').count(), 3);
    }
}
