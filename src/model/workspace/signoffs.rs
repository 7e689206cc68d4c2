//! The workspace's sign-off state: the sign-off edit and the findings it records, the
//! status of the latest sign-off against the effective tree, `verify`, and what changed since
//! a sign-off (from its snapshot).

use super::*;

impl Workspace {
    /// Open findings a sign-off records: findings of severity warning or error that are not
    /// accepted (a finding on a node reviewed as approved is accepted). Stale and skipped
    /// edits are findings of the audit's `stale-edit` rule and count too.
    pub fn signoff_open_findings(&self) -> Result<usize, WorkspaceError> {
        Ok(self.audit_now()?.open_count(Severity::Warning))
    }

    /// The sign-off edit for the effective tree as it stands: tree hash, open findings
    /// (warnings and errors, see [`Workspace::signoff_open_findings`]) and unreviewed nodes.
    /// Every front end builds its sign-off here.
    pub fn signoff_edit(&self, reviewer: &str) -> Result<Edit, WorkspaceError> {
        let open = self.signoff_open_findings()?;
        let eff = self.effective()?;
        Ok(signoff::signoff_edit(
            eff,
            &self.project.phrases,
            reviewer,
            open,
        ))
    }

    /// Whether the latest sign-off matches the current tree.
    pub fn sign_state(&self) -> SignState {
        let Some((_, rec)) = latest_signoff(&self.layer.edits) else {
            return SignState::Unsigned;
        };
        let Edit::Signoff {
            reviewer,
            tree_hash,
            ..
        } = &rec.edit
        else {
            return SignState::Unsigned;
        };
        if self.tree_hash.as_deref() == Some(tree_hash.as_str()) {
            SignState::Signed {
                reviewer: reviewer.clone(),
                time: rec.time.clone(),
            }
        } else {
            SignState::Stale {
                reviewer: reviewer.clone(),
            }
        }
    }

    /// The latest sign-off checked against the current effective tree, with every change
    /// since the signed tree (read from its snapshot) and its causes.
    pub fn verify(&self) -> Result<Verification, WorkspaceError> {
        let hash = latest_signoff(&self.layer.edits)
            .and_then(|(_, r)| match &r.edit {
                Edit::Signoff { tree_hash, .. } => Some(tree_hash.clone()),
                _ => None,
            })
            .unwrap_or_default();
        Ok(signoff::verify_with(
            self.base()?,
            &self.project.phrases,
            &self.layer.edits,
            |h| signed_tree::load_snapshot(&self.project.dir, h),
            &self.base_note(&hash),
        )?)
    }

    /// Nodes changed since the latest sign-off's tree (see [`SinceSummary`]); `None` when
    /// there is no sign-off or no tree. Kept until the next change of the tree.
    pub fn changed_since_signoff(&self) -> Option<SinceSummary> {
        latest_signoff(&self.layer.edits)?;
        self.eff.as_ref()?;
        let mut cache = self.since_cache.lock().unwrap_or_else(|e| e.into_inner());
        if let Some((g, v)) = cache.as_ref()
            && *g == self.generation
        {
            return Some(v.clone());
        }
        let v = self
            .count_since_signoff()
            .map(|s| (s.nodes_changed, s.complete))
            .map_err(|e| e.to_string());
        *cache = Some((self.generation, v.clone()));
        Some(v)
    }

    fn count_since_signoff(&self) -> Result<SinceSignoff, WorkspaceError> {
        let edits = &self.layer.edits;
        let (i, hash) = match latest_signoff(edits) {
            Some((i, r)) => match &r.edit {
                Edit::Signoff { tree_hash, .. } => (i, tree_hash),
                _ => return Err(self.no_signoff()),
            },
            None => return Err(self.no_signoff()),
        };
        let snapshot = signed_tree::load_snapshot(&self.project.dir, hash)?;
        let phrases = &self.project.phrases;
        Ok(signed_tree::since_signoff_uncaused(
            self.base()?,
            phrases,
            edits,
            i,
            snapshot,
        )?)
    }

    fn no_signoff(&self) -> WorkspaceError {
        WorkspaceError::NoSignoff {
            file: self.overrides_path().display().to_string(),
            at: String::new(),
        }
    }

    /// For a sign-off to be verified later: store the tree it signs (`signoffs/<hash>.json`)
    /// and the base tree file's hash, atomically, under `lock`. A sign-off whose hash is not
    /// the current tree's (built for another tree) stores nothing.
    pub(super) fn keep_signed_tree(
        &self,
        edit: &Edit,
        lock: &ProjectLock,
    ) -> Result<(), WorkspaceError> {
        let (Edit::Signoff { tree_hash, .. }, Some(eff)) = (edit, &self.eff) else {
            return Ok(());
        };
        let canon = signoff::canonical_tree(eff, &self.project.phrases);
        if signoff::sha256_hex(canon.as_bytes()) != *tree_hash {
            return Ok(());
        }
        let tree_path = self.project.tree_path();
        let base = BaseAtSignoff {
            tree_file: tree_path
                .strip_prefix(&self.project.dir)
                .unwrap_or(&tree_path)
                .display()
                .to_string(),
            sha256: self.disk_tree.map(|d| hex(&d)).unwrap_or_default(),
        };
        signed_tree::write_snapshot(&self.project.dir, &canon, &base, lock)?;
        Ok(())
    }

    /// What happened to the base tree since the sign-off of `hash`: the cause given to
    /// changes the edits do not explain.
    pub fn base_note(&self, hash: &str) -> String {
        let now = self.disk_tree.map(|d| hex(&d)).unwrap_or_default();
        match signed_tree::load_base_note(&self.project.dir, hash) {
            Some(b) if b.sha256 == now => {
                "the phrase table changed since the sign-off (the base tree file did not)".into()
            }
            Some(_) => {
                let when = std::fs::metadata(self.project.tree_path())
                    .and_then(|m| m.modified())
                    .ok()
                    .and_then(|t| t.duration_since(std::time::UNIX_EPOCH).ok())
                    .map(|d| {
                        let t = overrides::rfc3339_from_unix(d.as_secs() as i64);
                        format!(" on {}", &t[..t.len().min(10)])
                    })
                    .unwrap_or_default();
                let how = self
                    .build_report
                    .as_ref()
                    .map(|r| {
                        let sim = serde_json::to_value(r.params.similarity)
                            .ok()
                            .and_then(|v| v.as_str().map(str::to_string))
                            .unwrap_or_default();
                        format!(" (build, seed {}, similarity {sim})", r.params.seed)
                    })
                    .unwrap_or_default();
                format!("base tree replaced{when}{how}")
            }
            None => "the base tree or the phrase table changed since the sign-off (this sign-off \
                     recorded no base tree)"
                .into(),
        }
    }

    /// The signed tree of the sign-off at `index` (the latest when `None`) against the
    /// current effective tree: every change and its causes.
    pub fn since_signoff(&self, index: Option<usize>) -> Result<SinceSignoff, WorkspaceError> {
        let edits = &self.layer.edits;
        let found = match index {
            None => latest_signoff(edits).map(|(i, _)| i),
            Some(i) => edits
                .get(i)
                .filter(|r| matches!(r.edit, Edit::Signoff { .. }))
                .map(|_| i),
        };
        let no = || WorkspaceError::NoSignoff {
            file: self.overrides_path().display().to_string(),
            at: index.map(|i| format!(" at edit #{i}")).unwrap_or_default(),
        };
        let i = found.ok_or_else(no)?;
        let Edit::Signoff { tree_hash, .. } = &edits[i].edit else {
            return Err(no());
        };
        let snapshot = signed_tree::load_snapshot(&self.project.dir, tree_hash)?;
        Ok(signed_tree::since_signoff(
            self.base()?,
            &self.project.phrases,
            edits,
            i,
            snapshot,
            &self.base_note(tree_hash),
        )?)
    }
}
