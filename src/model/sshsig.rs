//! Signed sign-offs: OpenSSH "sshsig" signatures (namespace [`NAMESPACE`]) over a sign-off's
//! signed form ([`super::history::signed_message`]), checked against an `allowed_signers`
//! file and an optional list of revoked keys that the project's manifest names.
//!
//! Keys: ed25519 (OpenSSH private key files, also passphrase-protected ones; the passphrase
//! is asked for by the caller and never stored). Signatures are made and read in the armored
//! `-----BEGIN SSH SIGNATURE-----` form that `ssh-keygen -Y sign` writes and
//! `ssh-keygen -Y verify` reads, hash SHA-512.
//!
//! **allowed_signers**, the subset read here (the format of `ssh-keygen -Y verify -f`): one
//! entry a line, `PRINCIPALS [OPTIONS] KEYTYPE BASE64 [COMMENT]`; blank lines and lines
//! starting with `#` are skipped. PRINCIPALS is a comma-separated list of exact names
//! (no wildcard patterns). The only option read is `namespaces="a,b"` (the key is then allowed
//! only when `treewright-signoff` is listed); `cert-authority`, `valid-after` and
//! `valid-before` and any other option are refused with the line named, so that a file
//! meant for more than this subset is not read as something weaker.
//!
//! **Revoked keys**: one OpenSSH public key a line (`KEYTYPE BASE64 [COMMENT]`, `#` comments),
//! the plain-list form `ssh-keygen -Y verify -r` also reads. A signature by a listed key fails
//! even when the key is allowed.

use std::path::Path;

use ssh_key::{HashAlg, LineEnding, PrivateKey, PublicKey, SshSig, public::KeyData};

/// The sshsig namespace of a sign-off signature.
pub const NAMESPACE: &str = "treewright-signoff";

/// Why a sign-off's signature does not pass, or a key or signer file cannot be used.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum SignatureError {
    /// The sign-off carries no signature.
    #[error(
        "sign-off #{index} by {reviewer} is not signed; the project requires signed sign-offs ({allowed}); --allow-unsigned skips this check"
    )]
    Unsigned {
        /// Edit index.
        index: usize,
        /// Reviewer.
        reviewer: String,
        /// The allowed-signers file.
        allowed: String,
    },
    /// The signature text is not an sshsig signature.
    #[error("sign-off #{index}: the signature cannot be read: {why}")]
    Malformed {
        /// Edit index.
        index: usize,
        /// The parser's message.
        why: String,
    },
    /// The signing key is not in the allowed-signers file.
    #[error("sign-off #{index}: unknown key: signed by {key}, which is not in {allowed}")]
    UnknownKey {
        /// Edit index.
        index: usize,
        /// Key fingerprint (SHA256:…).
        key: String,
        /// The allowed-signers file.
        allowed: String,
    },
    /// The signing key is listed as revoked.
    #[error("sign-off #{index}: revoked: the key {key} is listed in {revoked}")]
    Revoked {
        /// Edit index.
        index: usize,
        /// Key fingerprint.
        key: String,
        /// The revoked-keys file.
        revoked: String,
    },
    /// The signature does not verify for the signed form of the sign-off.
    #[error(
        "sign-off #{index}: bad signature: {why} (the sign-off or an edit before it was changed after signing, or the signature belongs to another record)"
    )]
    BadSignature {
        /// Edit index.
        index: usize,
        /// What failed.
        why: String,
    },
    /// The key is allowed, but not for the reviewer the sign-off names.
    #[error(
        "sign-off #{index}: wrong principal: the sign-off names reviewer \"{reviewer}\" but the key {key} is allowed for {principals}"
    )]
    WrongPrincipal {
        /// Edit index.
        index: usize,
        /// Reviewer named in the sign-off.
        reviewer: String,
        /// Key fingerprint.
        key: String,
        /// The principals the key is allowed for.
        principals: String,
    },
    /// A signer file or key file could not be read or has a bad line.
    #[error("{file}: {why}")]
    File {
        /// The file (with `:LINE` for a bad line).
        file: String,
        /// What is wrong.
        why: String,
    },
}

/// One entry of an allowed-signers file.
#[derive(Debug, Clone)]
pub struct AllowedSigner {
    /// Exact principal names.
    pub principals: Vec<String>,
    /// The key.
    pub key: KeyData,
    /// Line number in the file (1-based).
    pub line: usize,
}

/// The project's signer policy: who may sign off, and which keys are revoked.
#[derive(Debug, Clone)]
pub struct SignerPolicy {
    /// The allowed-signers file (for messages).
    pub allowed_file: String,
    /// Its entries.
    pub allowed: Vec<AllowedSigner>,
    /// The revoked-keys file (for messages), if any.
    pub revoked_file: Option<String>,
    /// Revoked keys.
    pub revoked: Vec<KeyData>,
}

/// SHA-256 fingerprint of a key as OpenSSH prints it (`SHA256:…`).
pub fn fingerprint(key: &KeyData) -> String {
    key.fingerprint(HashAlg::Sha256).to_string()
}

fn read_text(path: &Path) -> Result<String, SignatureError> {
    std::fs::read_to_string(path).map_err(|e| SignatureError::File {
        file: path.display().to_string(),
        why: e.to_string(),
    })
}

/// Split a line into tokens, keeping double-quoted parts (with their quotes) inside tokens.
fn tokens(line: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    let mut quoted = false;
    for c in line.chars() {
        if c == '"' {
            quoted = !quoted;
            cur.push(c);
        } else if c.is_whitespace() && !quoted {
            if !cur.is_empty() {
                out.push(std::mem::take(&mut cur));
            }
        } else {
            cur.push(c);
        }
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}

/// Split an options field on the commas outside double quotes.
fn split_options(field: &str) -> Vec<String> {
    let mut out = vec![String::new()];
    let mut quoted = false;
    for c in field.chars() {
        if c == ',' && !quoted {
            out.push(String::new());
            continue;
        }
        if c == '"' {
            quoted = !quoted;
        }
        if let Some(s) = out.last_mut() {
            s.push(c);
        }
    }
    out
}

fn is_key_type(t: &str) -> bool {
    t.starts_with("ssh-") || t.starts_with("ecdsa-") || t.starts_with("sk-")
}

/// Parse an allowed-signers file's text (see the module documentation for the subset).
pub fn parse_allowed_signers(text: &str, file: &str) -> Result<Vec<AllowedSigner>, SignatureError> {
    let mut out = Vec::new();
    for (n, raw) in text.lines().enumerate() {
        let line = raw.trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        let bad = |why: String| SignatureError::File {
            file: format!("{file}:{}", n + 1),
            why,
        };
        let t = tokens(line);
        let principals: Vec<String> = t[0]
            .trim_matches('"')
            .split(',')
            .map(|p| p.trim().to_string())
            .filter(|p| !p.is_empty())
            .collect();
        if principals.is_empty() {
            return Err(bad("no principal".into()));
        }
        if principals.iter().any(|p| p.contains(['*', '?', '!'])) {
            return Err(bad(format!(
                "principal patterns are not supported (\"{}\"); list exact names",
                t[0]
            )));
        }
        let mut k = 1;
        let mut allowed_here = true;
        if t.get(k).is_some_and(|x| !is_key_type(x)) {
            for opt in split_options(&t[k]) {
                let opt = opt.as_str();
                let (name, value) = match opt.split_once('=') {
                    Some((a, b)) => (a.to_ascii_lowercase(), Some(b.trim_matches('"'))),
                    None => (opt.to_ascii_lowercase(), None),
                };
                match (name.as_str(), value) {
                    ("namespaces", Some(v)) => {
                        allowed_here = v.split(',').any(|ns| ns.trim() == NAMESPACE);
                    }
                    _ => {
                        return Err(bad(format!(
                            "option \"{opt}\" is not supported (only namespaces=\"…\" is read)"
                        )));
                    }
                }
            }
            k += 1;
        }
        let key_text = t[k..].join(" ");
        let key = PublicKey::from_openssh(&key_text)
            .map_err(|e| bad(format!("not a public key: {e}")))?;
        if allowed_here {
            out.push(AllowedSigner {
                principals,
                key: key.key_data().clone(),
                line: n + 1,
            });
        }
    }
    Ok(out)
}

/// Parse a revoked-keys file's text: one public key a line.
pub fn parse_revoked(text: &str, file: &str) -> Result<Vec<KeyData>, SignatureError> {
    let mut out = Vec::new();
    for (n, raw) in text.lines().enumerate() {
        let line = raw.trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        let key = PublicKey::from_openssh(line).map_err(|e| SignatureError::File {
            file: format!("{file}:{}", n + 1),
            why: format!("not a public key: {e}"),
        })?;
        out.push(key.key_data().clone());
    }
    Ok(out)
}

impl SignerPolicy {
    /// Read the allowed-signers file and the optional revoked-keys file.
    pub fn load(allowed: &Path, revoked: Option<&Path>) -> Result<Self, SignatureError> {
        let allowed_file = allowed.display().to_string();
        let entries = parse_allowed_signers(&read_text(allowed)?, &allowed_file)?;
        let (revoked_file, keys) = match revoked {
            Some(p) => {
                let f = p.display().to_string();
                let keys = parse_revoked(&read_text(p)?, &f)?;
                (Some(f), keys)
            }
            None => (None, Vec::new()),
        };
        Ok(SignerPolicy {
            allowed_file,
            allowed: entries,
            revoked_file,
            revoked: keys,
        })
    }

    /// Check the signature of the sign-off at `index` whose signed form is `message`.
    /// Returns the signing key's fingerprint.
    pub fn check(
        &self,
        index: usize,
        reviewer: &str,
        signature: Option<&str>,
        message: &[u8],
    ) -> Result<String, SignatureError> {
        let Some(text) = signature else {
            return Err(SignatureError::Unsigned {
                index,
                reviewer: reviewer.to_string(),
                allowed: self.allowed_file.clone(),
            });
        };
        let sig = SshSig::from_pem(text).map_err(|e| SignatureError::Malformed {
            index,
            why: e.to_string(),
        })?;
        let key = sig.public_key().clone();
        let fp = fingerprint(&key);
        if self.revoked.contains(&key) {
            return Err(SignatureError::Revoked {
                index,
                key: fp,
                revoked: self.revoked_file.clone().unwrap_or_default(),
            });
        }
        let entries: Vec<&AllowedSigner> = self.allowed.iter().filter(|a| a.key == key).collect();
        if entries.is_empty() {
            return Err(SignatureError::UnknownKey {
                index,
                key: fp,
                allowed: self.allowed_file.clone(),
            });
        }
        verify_raw(&key, &sig, message)
            .map_err(|why| SignatureError::BadSignature { index, why })?;
        if !entries
            .iter()
            .any(|a| a.principals.iter().any(|p| p == reviewer))
        {
            let mut principals: Vec<String> = entries
                .iter()
                .flat_map(|a| a.principals.iter().cloned())
                .collect();
            principals.dedup();
            return Err(SignatureError::WrongPrincipal {
                index,
                reviewer: reviewer.to_string(),
                key: fp,
                principals: principals.join(", "),
            });
        }
        Ok(fp)
    }
}

/// Verify `sig` by `key` over `message` in [`NAMESPACE`]; `Err` says what failed.
fn verify_raw(key: &KeyData, sig: &SshSig, message: &[u8]) -> Result<(), String> {
    if sig.namespace() != NAMESPACE {
        return Err(format!(
            "namespace is \"{}\", expected \"{NAMESPACE}\"",
            sig.namespace()
        ));
    }
    PublicKey::from(key.clone())
        .verify(NAMESPACE, message, sig)
        .map_err(|e| format!("the signature does not verify ({e})"))
}

/// Read an OpenSSH private key file. An encrypted key is decrypted with the passphrase
/// `ask` returns (called only for an encrypted key; `None` = no way to ask).
pub fn read_private_key(
    path: &Path,
    ask: impl FnOnce() -> Option<String>,
) -> Result<PrivateKey, SignatureError> {
    let file = path.display().to_string();
    let err = |why: String| SignatureError::File {
        file: file.clone(),
        why,
    };
    let text = read_text(path)?;
    let key = PrivateKey::from_openssh(&text)
        .map_err(|e| err(format!("not an OpenSSH private key: {e}")))?;
    let key = if key.is_encrypted() {
        let Some(pass) = ask() else {
            return Err(err(
                "the key is protected by a passphrase and there is no terminal to ask for it; \
                 run on a terminal, or use the workbench's passphrase field"
                    .into(),
            ));
        };
        key.decrypt(pass.as_bytes())
            .map_err(|_| err("wrong passphrase (the key could not be decrypted)".into()))?
    } else {
        key
    };
    if !matches!(key.public_key().key_data(), KeyData::Ed25519(_)) {
        return Err(err(format!(
            "key type {} is not supported; use an ed25519 key",
            key.algorithm()
        )));
    }
    Ok(key)
}

/// Whether the key file needs a passphrase (false when unreadable: reading it reports that).
pub fn key_is_encrypted(path: &Path) -> bool {
    std::fs::read_to_string(path)
        .ok()
        .and_then(|t| PrivateKey::from_openssh(&t).ok())
        .is_some_and(|k| k.is_encrypted())
}

/// Sign `message` in [`NAMESPACE`]: the armored signature text.
pub fn sign(key: &PrivateKey, message: &[u8]) -> Result<String, SignatureError> {
    let err = |e: ssh_key::Error| SignatureError::File {
        file: "signing key".into(),
        why: e.to_string(),
    };
    let sig = key.sign(NAMESPACE, HashAlg::Sha512, message).map_err(err)?;
    sig.to_pem(LineEnding::LF).map_err(err)
}
