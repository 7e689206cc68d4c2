//! Three-way merge of override layers: the common ancestor's edits (BASE), ours and theirs.
//!
//! Two curators who branched from one override file each append edits (and may undo some).
//! [`merge`] combines them:
//!
//! * base edits kept on both sides stay, in base order; a base edit dropped (undone) on either
//!   side is dropped;
//! * edits added on only one side are kept: **ours first, then theirs**. This is the order of
//!   a rebase of their work onto ours (the file in the working copy is ours; their edits are
//!   replayed on top), it keeps each side's own order intact, and it does not depend on clocks
//!   (edit times come from two machines and need not be comparable). An edit added
//!   identically on both sides is kept once.
//!
//! Conflicts are found on the effective trees, not on text: for every phrase that edits of
//! both sides are about, the two sides' effective trees are compared (parent and pin, label,
//! exclusion and merge target, review status); an exclusion or merge on one side against a
//! move, rename or review on the other always conflicts. The combined list is then replayed
//! in both orders (ours-then-theirs and theirs-then-ours): an edit that applied on its own
//! side but no longer applies (a cycle, a merge into a node the other side excluded, ...) is
//! a conflict, and so is a phrase whose state depends on the order. Conflicts that share an
//! edit are one conflict. The conflicting edits are taken out of the merged list and kept in
//! the conflict with the effective-tree consequence of each choice; resolving a conflict
//! appends the chosen side's edits (in their original order) to the merged list.
//!
//! Sign-off edits never conflict: both sides' sign-offs are kept as history. Whether the
//! merged tree is signed off is decided as always by its hash ([`super::signoff::verify`]);
//! [`MergeOutcome::signed_by`] names a recorded sign-off whose hash equals the merged tree's.

use std::collections::{BTreeMap, BTreeSet, HashMap};

use serde::{Deserialize, Serialize};

use super::edit::{Edit, EditRecord};
use super::effective::EffectiveTree;
use super::gaussian::PhraseId;
use super::overrides::apply;
use super::phrase::PhraseTable;
use super::signoff::{describe_edit, tree_hash};
use super::tree::Tree;

/// One side of a three-way merge.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Side {
    /// The layer merged into (git's `%A`, the workbench's own edits).
    Ours,
    /// The layer merged in (git's `%B`, the file on disk in the workbench).
    Theirs,
}

impl Side {
    /// `ours` or `theirs`.
    pub fn as_str(self) -> &'static str {
        match self {
            Side::Ours => "ours",
            Side::Theirs => "theirs",
        }
    }

    /// Parse `ours` or `theirs`.
    pub fn parse(s: &str) -> Option<Self> {
        match s {
            "ours" => Some(Side::Ours),
            "theirs" => Some(Side::Theirs),
            _ => None,
        }
    }
}

/// A semantic conflict between the two sides, stored in the `conflicts` section of a merged
/// override file until it is resolved.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Conflict {
    /// Stable id within the file (`c1`, `c2`, ...).
    pub id: String,
    /// What kind of conflict: `placement`, `label`, `removal`, `removed-vs-changed`,
    /// `review`, `does-not-apply`, `order` (several when conflicts were joined).
    pub kinds: Vec<String>,
    /// The phrase ids the conflict is about.
    pub nodes: Vec<String>,
    /// Our conflicting edits, in their original order.
    pub ours: Vec<EditRecord>,
    /// Their conflicting edits, in their original order.
    pub theirs: Vec<EditRecord>,
    /// The conflict's nodes in the effective tree when ours is taken.
    #[serde(default)]
    pub if_ours: Vec<String>,
    /// The conflict's nodes in the effective tree when theirs is taken.
    #[serde(default)]
    pub if_theirs: Vec<String>,
}

impl Conflict {
    /// The edits of one side.
    pub fn side(&self, side: Side) -> &[EditRecord] {
        match side {
            Side::Ours => &self.ours,
            Side::Theirs => &self.theirs,
        }
    }

    /// Human-readable lines: kinds, nodes, both sides' edits with authors and times, and the
    /// consequence of each choice.
    pub fn render(&self) -> String {
        use std::fmt::Write;
        let mut s = String::new();
        let _ = writeln!(
            s,
            "conflict {} ({}) on {}",
            self.id,
            self.kinds.join(", "),
            self.nodes.join(", ")
        );
        for (side, edits, result) in [
            (Side::Ours, &self.ours, &self.if_ours),
            (Side::Theirs, &self.theirs, &self.if_theirs),
        ] {
            let _ = writeln!(s, "  {}:", side.as_str());
            if edits.is_empty() {
                let _ = writeln!(s, "    (no edit)");
            }
            for r in edits {
                let _ = writeln!(
                    s,
                    "    {} (by {}, {})",
                    describe_edit(&r.edit),
                    r.author,
                    r.time
                );
            }
            for line in result {
                let _ = writeln!(s, "    => {line}");
            }
        }
        s
    }
}

/// The result of a three-way merge.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct MergeOutcome {
    /// The merged edits without the conflicting ones.
    pub edits: Vec<EditRecord>,
    /// The conflicts, in order of their first edit.
    pub conflicts: Vec<Conflict>,
    /// Edits only ours added.
    pub added_ours: Vec<EditRecord>,
    /// Edits only theirs added.
    pub added_theirs: Vec<EditRecord>,
    /// Base edits that one side dropped (undid), and so the merge drops.
    pub dropped: Vec<EditRecord>,
    /// A recorded sign-off whose hash equals the merged tree's (`reviewer at time`); `None`
    /// means the merged tree is not signed off.
    pub signed_by: Option<String>,
}

impl MergeOutcome {
    /// Whether the merge has no conflict.
    pub fn is_clean(&self) -> bool {
        self.conflicts.is_empty()
    }

    /// The edits when every conflict is resolved to `side` (original order kept).
    pub fn take_all(&self, side: Side) -> Vec<EditRecord> {
        take_all(&self.edits, &self.conflicts, side)
    }
}

/// Resolve every conflict to `side`: the chosen edits are appended conflict by conflict.
pub fn take_all(edits: &[EditRecord], conflicts: &[Conflict], side: Side) -> Vec<EditRecord> {
    let mut out = edits.to_vec();
    for c in conflicts {
        out.extend(c.side(side).iter().cloned());
    }
    super::history::fix_revert_indices(&mut out);
    out
}

/// Resolve one conflict of a merged file to `side`: its chosen edits are appended to
/// `edits` and it leaves `conflicts`. `None` when no conflict has this id.
pub fn resolve_one(
    edits: &mut Vec<EditRecord>,
    conflicts: &mut Vec<Conflict>,
    id: &str,
    side: Side,
) -> Option<Conflict> {
    let i = conflicts.iter().position(|c| c.id == id)?;
    let c = conflicts.remove(i);
    edits.extend(c.side(side).iter().cloned());
    super::history::fix_revert_indices(edits);
    Some(c)
}

/// A stable key of an edit record (its compact JSON).
fn key(r: &EditRecord) -> String {
    serde_json::to_string(r).unwrap_or_default()
}

/// `side` minus `base` as multisets, keeping `side`'s order.
fn minus(side: &[EditRecord], base: &[EditRecord]) -> Vec<EditRecord> {
    let mut count: HashMap<String, usize> = HashMap::new();
    for r in base {
        *count.entry(key(r)).or_default() += 1;
    }
    side.iter()
        .filter(|r| match count.get_mut(&key(r)) {
            Some(n) if *n > 0 => {
                *n -= 1;
                false
            }
            _ => true,
        })
        .cloned()
        .collect()
}

/// What an edit is about, per phrase.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
enum Cat {
    Place,
    Label,
    Remove,
    Review,
}

fn subjects(e: &Edit) -> Vec<(&str, Cat)> {
    match e {
        Edit::Reparent { node, .. } | Edit::Pin { node, .. } | Edit::Unpin { node } => {
            vec![(node, Cat::Place)]
        }
        Edit::Rename { node, .. } => vec![(node, Cat::Label)],
        Edit::Exclude { node } | Edit::Include { node } => vec![(node, Cat::Remove)],
        Edit::Merge { sources, .. } => sources.iter().map(|s| (s.as_str(), Cat::Remove)).collect(),
        Edit::Review { node, .. } => vec![(node, Cat::Review)],
        Edit::Signoff { .. } | Edit::Revert { .. } => Vec::new(),
    }
}

/// The state of one phrase in an effective tree, for comparing sides.
#[derive(Debug, Clone, PartialEq, Eq)]
struct NodeState {
    parent: Option<PhraseId>,
    pinned: bool,
    /// Every effective label with its language (default first): renames in any language.
    labels: Vec<(String, String)>,
    alias_of: Option<PhraseId>,
    excluded: bool,
    placed: bool,
    review: super::edit::ReviewStatus,
}

fn state(eff: &EffectiveTree, p: PhraseId) -> NodeState {
    let i = p as usize;
    NodeState {
        parent: eff.tree.parent(p),
        pinned: eff.pinned[i],
        labels: eff
            .labels_of(p)
            .into_iter()
            .map(|(l, s)| (l.to_string(), s.to_string()))
            .collect(),
        alias_of: eff.alias_of[i],
        excluded: eff.excluded[i],
        placed: eff.tree.is_placed(p),
        review: eff.review[i],
    }
}

/// One line describing a phrase in an effective tree (where it is, its label, its review).
pub fn describe_node(eff: &EffectiveTree, phrases: &PhraseTable, p: PhraseId) -> String {
    let i = p as usize;
    let id = phrases.id(p);
    let label = &eff.labels[i];
    let place = if let Some(t) = eff.alias_of[i] {
        format!("merged into {}", phrases.id(t))
    } else if eff.excluded[i] {
        "excluded".to_string()
    } else if let Some(par) = eff.tree.parent(p) {
        format!(
            "under {} \"{}\"{}",
            phrases.id(par),
            eff.labels[par as usize],
            if eff.pinned[i] { " (pinned)" } else { "" }
        )
    } else if eff.tree.is_placed(p) {
        "the root".to_string()
    } else {
        "not in the tree".to_string()
    };
    format!("{id} \"{label}\": {place}, {}", eff.review[i].as_str())
}

/// A comparable fingerprint of everything an effective tree says about every phrase
/// (canonical tree plus pins and reviews): equal fingerprints mean the same curated tree.
pub fn state_fingerprint(eff: &EffectiveTree, phrases: &PhraseTable) -> String {
    let mut s = super::signoff::canonical_tree(eff, phrases);
    for p in 0..phrases.len() {
        s.push_str(&format!(
            "|{}{}",
            u8::from(eff.pinned[p]),
            eff.review[p].as_str()
        ));
    }
    s
}

/// A conflict under construction: edit keys per side.
#[derive(Debug, Default, Clone)]
struct Draft {
    kinds: BTreeSet<String>,
    nodes: BTreeSet<String>,
    ours: BTreeSet<String>,
    theirs: BTreeSet<String>,
}

/// Failing edits (by key) of a list.
fn failing(base: &Tree, phrases: &PhraseTable, edits: &[EditRecord]) -> BTreeSet<String> {
    let (_, problems) = apply(base, phrases, edits);
    problems
        .iter()
        .filter(|p| p.index < edits.len())
        .map(|p| key(&edits[p.index]))
        .collect()
}

fn shares_phrase(a: &Edit, b: &Edit) -> bool {
    let pa = a.phrases();
    b.phrases().iter().any(|x| pa.contains(x))
}

/// Three-way merge of override layers over one project (`base_tree`, `phrases`).
pub fn merge(
    base_tree: &Tree,
    phrases: &PhraseTable,
    base: &[EditRecord],
    ours: &[EditRecord],
    theirs: &[EditRecord],
) -> MergeOutcome {
    let added_ours = minus(ours, base);
    let added_theirs_all = minus(theirs, base);
    let added_theirs = minus(&added_theirs_all, &added_ours);
    // base edits kept on both sides
    let kept_ours = minus(ours, &added_ours);
    let kept: Vec<EditRecord> = {
        let gone_t = minus(base, &minus(theirs, &added_theirs_all));
        minus(&kept_ours, &gone_t)
    };
    let dropped = minus(base, &kept);

    let ours_keys: BTreeSet<String> = added_ours.iter().map(key).collect();
    let theirs_keys: BTreeSet<String> = added_theirs.iter().map(key).collect();
    let side_of = |k: &str| {
        if ours_keys.contains(k) {
            Some(Side::Ours)
        } else if theirs_keys.contains(k) {
            Some(Side::Theirs)
        } else {
            None
        }
    };

    let mut forward = kept.clone();
    forward.extend(added_ours.iter().cloned());
    forward.extend(added_theirs.iter().cloned());
    let mut backward = kept.clone();
    backward.extend(added_theirs.iter().cloned());
    backward.extend(added_ours.iter().cloned());

    let mut own_o = kept.clone();
    own_o.extend(added_ours.iter().cloned());
    let mut own_t = kept.clone();
    own_t.extend(added_theirs.iter().cloned());
    let (eff_o, prob_o) = apply(base_tree, phrases, &own_o);
    let (eff_t, prob_t) = apply(base_tree, phrases, &own_t);
    let mut fails_alone: BTreeSet<String> = BTreeSet::new();
    for (list, probs) in [(&own_o, &prob_o), (&own_t, &prob_t)] {
        for p in probs.iter().filter(|p| p.index < list.len()) {
            fails_alone.insert(key(&list[p.index]));
        }
    }

    let mut drafts: Vec<Draft> = Vec::new();

    // 1. per phrase: both sides' edits about it, compared on the two effective trees
    let mut touch_o: BTreeMap<&str, Vec<(Cat, &EditRecord)>> = BTreeMap::new();
    let mut touch_t: BTreeMap<&str, Vec<(Cat, &EditRecord)>> = BTreeMap::new();
    for (map, list) in [(&mut touch_o, &added_ours), (&mut touch_t, &added_theirs)] {
        for r in list.iter() {
            for (id, c) in subjects(&r.edit) {
                map.entry(id).or_default().push((c, r));
            }
        }
    }
    for (id, to) in &touch_o {
        let Some(tt) = touch_t.get(id) else { continue };
        let Some(p) = phrases.get(id) else { continue };
        let (so, st) = (state(&eff_o, p), state(&eff_t, p));
        let mut d = Draft::default();
        for &(co, ro) in to {
            for &(ct, rt) in tt {
                let kind = match (co, ct) {
                    (Cat::Place, Cat::Place)
                        if (so.parent, so.pinned, so.placed)
                            != (st.parent, st.pinned, st.placed) =>
                    {
                        Some("placement")
                    }
                    (Cat::Label, Cat::Label) if so.labels != st.labels => Some("label"),
                    (Cat::Remove, Cat::Remove)
                        if (so.alias_of, so.excluded) != (st.alias_of, st.excluded) =>
                    {
                        Some("removal")
                    }
                    (Cat::Remove, Cat::Place | Cat::Label | Cat::Review)
                    | (Cat::Place | Cat::Label | Cat::Review, Cat::Remove) => {
                        Some("removed-vs-changed")
                    }
                    (Cat::Review, Cat::Review) if so.review != st.review => Some("review"),
                    _ => None,
                };
                if let Some(k) = kind {
                    d.kinds.insert(k.to_string());
                    d.ours.insert(key(ro));
                    d.theirs.insert(key(rt));
                }
            }
        }
        if !d.kinds.is_empty() {
            d.nodes.insert(id.to_string());
            drafts.push(d);
        }
    }

    // 2. edits that applied on their own side but not in a combined order
    let mut broken: BTreeSet<String> = failing(base_tree, phrases, &forward);
    broken.extend(failing(base_tree, phrases, &backward));
    let all_added: Vec<&EditRecord> = added_ours.iter().chain(added_theirs.iter()).collect();
    let add_broken = |drafts: &mut Vec<Draft>, k: &str, fallback_all: bool| {
        let Some(side) = side_of(k) else { return };
        let Some(r) = all_added.iter().find(|r| key(r) == k) else {
            return;
        };
        let other: Vec<String> = all_added
            .iter()
            .filter(|o| side_of(&key(o)) == Some(other_side(side)))
            .filter(|o| !matches!(o.edit, Edit::Signoff { .. }))
            .filter(|o| fallback_all || shares_phrase(&r.edit, &o.edit))
            .map(|o| key(o))
            .collect();
        let mut d = Draft::default();
        d.kinds.insert("does-not-apply".into());
        d.nodes
            .extend(r.edit.phrases().iter().map(|s| s.to_string()));
        let (mine, theirs) = match side {
            Side::Ours => (&mut d.ours, &mut d.theirs),
            Side::Theirs => (&mut d.theirs, &mut d.ours),
        };
        mine.insert(k.to_string());
        theirs.extend(other);
        drafts.push(d);
    };
    for k in &broken {
        if fails_alone.contains(k) || side_of(k).is_none() {
            continue;
        }
        let r = all_added.iter().find(|r| &key(r) == k);
        let shares = r.is_some_and(|r| {
            all_added.iter().any(|o| {
                side_of(&key(o)) != side_of(k)
                    && !matches!(o.edit, Edit::Signoff { .. })
                    && shares_phrase(&r.edit, &o.edit)
            })
        });
        add_broken(&mut drafts, k, !shares);
    }

    // 3. phrases whose state depends on the order
    let (eff_f, _) = apply(base_tree, phrases, &forward);
    let (eff_b, _) = apply(base_tree, phrases, &backward);
    for p in 0..phrases.len() as PhraseId {
        if state(&eff_f, p) == state(&eff_b, p) {
            continue;
        }
        let id = phrases.id(p);
        if drafts.iter().any(|d| d.nodes.contains(id)) {
            continue; // already a conflict about this phrase
        }
        // the phrase and its ancestors (below the root) in either order's tree and in the
        // base tree: an edit about any of them may be what moved it
        let mut near: BTreeSet<&str> = BTreeSet::from([id]);
        for t in [&eff_f.tree, &eff_b.tree, base_tree] {
            let mut cur = t.parent(p);
            while let Some(a) = cur {
                if a != t.root() {
                    near.insert(phrases.id(a));
                }
                cur = t.parent(a);
            }
        }
        let mut d = Draft::default();
        for r in &all_added {
            if r.edit.phrases().iter().any(|x| near.contains(x)) {
                match side_of(&key(r)) {
                    Some(Side::Ours) => d.ours.insert(key(r)),
                    Some(Side::Theirs) => d.theirs.insert(key(r)),
                    None => false,
                };
            }
        }
        // an edit of one side that only works after (or before) an edit of the other side
        // about a phrase they share: those two are the conflict
        for (mine, other) in [(Side::Ours, Side::Theirs), (Side::Theirs, Side::Ours)] {
            let (m, o) = match mine {
                Side::Ours => (&d.ours, &d.theirs),
                Side::Theirs => (&d.theirs, &d.ours),
            };
            if !o.is_empty() || m.is_empty() {
                continue;
            }
            let mine_recs: Vec<&&EditRecord> =
                all_added.iter().filter(|r| m.contains(&key(r))).collect();
            let of_other = || {
                all_added
                    .iter()
                    .filter(|r| side_of(&key(r)) == Some(other))
                    .filter(|r| !matches!(r.edit, Edit::Signoff { .. }))
            };
            let mut found: Vec<String> = of_other()
                .filter(|r| mine_recs.iter().any(|x| shares_phrase(&x.edit, &r.edit)))
                .map(|r| key(r))
                .collect();
            if found.is_empty() {
                // no shared phrase (e.g. a move elsewhere in the subtree turned a cycle
                // into a valid move): the other side's moves and removals are the cause
                found = of_other()
                    .filter(|r| {
                        subjects(&r.edit)
                            .iter()
                            .any(|(_, c)| matches!(c, Cat::Place | Cat::Remove))
                    })
                    .map(|r| key(r))
                    .collect();
            }
            match other {
                Side::Ours => d.ours.extend(found),
                Side::Theirs => d.theirs.extend(found),
            }
        }
        if d.ours.is_empty() || d.theirs.is_empty() {
            continue; // one side alone decides it; its reason shows elsewhere
        }
        d.kinds.insert("order".into());
        d.nodes.insert(id.to_string());
        drafts.push(d);
    }

    // 4. join conflicts that share an edit; then edits that depended on a conflicting edit
    let mut joined = join(drafts);
    for _ in 0..8 {
        let in_conflict: BTreeSet<&String> = joined
            .iter()
            .flat_map(|d| d.ours.iter().chain(&d.theirs))
            .collect();
        let clean: Vec<EditRecord> = forward
            .iter()
            .filter(|r| !in_conflict.contains(&key(r)))
            .cloned()
            .collect();
        let clean_back: Vec<EditRecord> = backward
            .iter()
            .filter(|r| !in_conflict.contains(&key(r)))
            .cloned()
            .collect();
        let mut newly = failing(base_tree, phrases, &clean);
        newly.extend(failing(base_tree, phrases, &clean_back));
        let newly: Vec<String> = newly
            .into_iter()
            .filter(|k| !fails_alone.contains(k) && side_of(k).is_some())
            .collect();
        if newly.is_empty() {
            break;
        }
        for k in newly {
            let side = side_of(&k).unwrap_or(Side::Ours);
            let r = all_added.iter().find(|r| key(r) == k).copied();
            // the conflict holding an edit of the same side that names one of its phrases
            let host = joined.iter().position(|d| {
                let same = match side {
                    Side::Ours => &d.ours,
                    Side::Theirs => &d.theirs,
                };
                same.iter().any(|o| {
                    all_added
                        .iter()
                        .find(|x| &key(x) == o)
                        .zip(r)
                        .is_some_and(|(x, r)| shares_phrase(&x.edit, &r.edit))
                })
            });
            match host {
                Some(h) => {
                    let d = &mut joined[h];
                    match side {
                        Side::Ours => d.ours.insert(k),
                        Side::Theirs => d.theirs.insert(k),
                    };
                }
                None => add_broken(&mut joined, &k, true),
            }
        }
        joined = join(joined);
    }

    // 5. build the outcome
    let in_conflict: BTreeSet<String> = joined
        .iter()
        .flat_map(|d| d.ours.iter().chain(&d.theirs).cloned())
        .collect();
    let edits: Vec<EditRecord> = forward
        .iter()
        .filter(|r| !in_conflict.contains(&key(r)))
        .cloned()
        .collect();
    let pos: HashMap<String, usize> = forward
        .iter()
        .enumerate()
        .map(|(i, r)| (key(r), i))
        .collect();
    let pick = |keys: &BTreeSet<String>| {
        let mut v: Vec<(usize, EditRecord)> = forward
            .iter()
            .filter(|r| keys.contains(&key(r)))
            .map(|r| (pos[&key(r)], r.clone()))
            .collect();
        v.sort_by_key(|(i, _)| *i);
        v.into_iter().map(|(_, r)| r).collect::<Vec<_>>()
    };
    let mut conflicts: Vec<(usize, Conflict)> = joined
        .iter()
        .map(|d| {
            let ours = pick(&d.ours);
            let theirs = pick(&d.theirs);
            let first = ours
                .iter()
                .chain(&theirs)
                .map(|r| pos[&key(r)])
                .min()
                .unwrap_or(0);
            let nodes: Vec<String> = d.nodes.iter().cloned().collect();
            let consequence = |chosen: &[EditRecord]| {
                let mut list = edits.clone();
                list.extend(chosen.iter().cloned());
                let (eff, _) = apply(base_tree, phrases, &list);
                nodes
                    .iter()
                    .filter_map(|id| phrases.get(id))
                    .map(|p| describe_node(&eff, phrases, p))
                    .collect::<Vec<_>>()
            };
            let c = Conflict {
                id: String::new(),
                kinds: d.kinds.iter().cloned().collect(),
                if_ours: consequence(&ours),
                if_theirs: consequence(&theirs),
                nodes,
                ours,
                theirs,
            };
            (first, c)
        })
        .collect();
    conflicts.sort_by_key(|(i, _)| *i);
    let conflicts: Vec<Conflict> = conflicts
        .into_iter()
        .enumerate()
        .map(|(i, (_, mut c))| {
            c.id = format!("c{}", i + 1);
            c
        })
        .collect();

    // reverts name their edit by its hash; point their indices at where it now is
    let mut edits = edits;
    super::history::fix_revert_indices(&mut edits);
    let signed_by = if conflicts.is_empty() {
        signed_by(base_tree, phrases, &edits)
    } else {
        None
    };
    MergeOutcome {
        edits,
        conflicts,
        added_ours,
        added_theirs,
        dropped,
        signed_by,
    }
}

/// A recorded sign-off whose hash equals the effective tree of `edits` (`reviewer at time`).
pub fn signed_by(base_tree: &Tree, phrases: &PhraseTable, edits: &[EditRecord]) -> Option<String> {
    let (eff, _) = apply(base_tree, phrases, edits);
    let h = tree_hash(&eff, phrases);
    edits.iter().rev().find_map(|r| match &r.edit {
        Edit::Signoff {
            reviewer,
            tree_hash,
            ..
        } if *tree_hash == h => Some(format!("{reviewer} at {}", r.time)),
        _ => None,
    })
}

/// Where a placement conflict puts one of its nodes under each choice: what the workbench's
/// two-parent ellipse view draws.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PlacementChoice {
    /// The node both sides placed.
    pub node: PhraseId,
    /// Its parent when ours is kept (`None`: unplaced or the root).
    pub if_ours: Option<PhraseId>,
    /// Its parent when theirs is kept.
    pub if_theirs: Option<PhraseId>,
}

/// For a conflict of kind `placement`: each of its nodes with its parent in the effective
/// tree of `edits` (the merged edits without the conflicting ones) plus one side's edits,
/// the same trees [`Conflict::if_ours`] and [`Conflict::if_theirs`] describe. Empty for
/// other kinds.
pub fn placement_choices(
    base_tree: &Tree,
    phrases: &PhraseTable,
    edits: &[EditRecord],
    c: &Conflict,
) -> Vec<PlacementChoice> {
    if !c.kinds.iter().any(|k| k == "placement") {
        return Vec::new();
    }
    let parents = |side: Side| {
        let mut list = edits.to_vec();
        list.extend(c.side(side).iter().cloned());
        let (eff, _) = apply(base_tree, phrases, &list);
        c.nodes
            .iter()
            .filter_map(|id| phrases.get(id))
            .map(|p| (p, eff.tree.parent(p)))
            .collect::<Vec<_>>()
    };
    parents(Side::Ours)
        .into_iter()
        .zip(parents(Side::Theirs))
        .filter(|((_, o), (_, t))| o != t)
        .map(|((node, if_ours), (_, if_theirs))| PlacementChoice {
            node,
            if_ours,
            if_theirs,
        })
        .collect()
}

fn other_side(s: Side) -> Side {
    match s {
        Side::Ours => Side::Theirs,
        Side::Theirs => Side::Ours,
    }
}

/// Join drafts that share an edit (union-find over drafts).
fn join(drafts: Vec<Draft>) -> Vec<Draft> {
    let n = drafts.len();
    let mut parent: Vec<usize> = (0..n).collect();
    fn find(p: &mut [usize], mut x: usize) -> usize {
        while p[x] != x {
            p[x] = p[p[x]];
            x = p[x];
        }
        x
    }
    let mut owner: HashMap<&String, usize> = HashMap::new();
    for (i, d) in drafts.iter().enumerate() {
        for k in d.ours.iter().chain(&d.theirs) {
            if let Some(&j) = owner.get(k) {
                let (a, b) = (find(&mut parent, i), find(&mut parent, j));
                parent[a] = b;
            } else {
                owner.insert(k, i);
            }
        }
    }
    let mut groups: BTreeMap<usize, Draft> = BTreeMap::new();
    for (i, d) in drafts.iter().enumerate() {
        let r = find(&mut parent, i);
        let g = groups.entry(r).or_default();
        g.kinds.extend(d.kinds.iter().cloned());
        g.nodes.extend(d.nodes.iter().cloned());
        g.ours.extend(d.ours.iter().cloned());
        g.theirs.extend(d.theirs.iter().cloned());
    }
    groups.into_values().collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::edit::ReviewStatus;

    fn project() -> (PhraseTable, Tree) {
        let t =
            PhraseTable::from_ids(&["root", "tools", "seeds", "rake", "spade", "bulbs"]).unwrap();
        let m: BTreeMap<String, String> = [
            ("tools", "root"),
            ("seeds", "root"),
            ("rake", "tools"),
            ("spade", "tools"),
            ("bulbs", "seeds"),
        ]
        .iter()
        .map(|(a, b)| (a.to_string(), b.to_string()))
        .collect();
        let tree = Tree::from_id_map(&t, "root", &m).unwrap();
        (t, tree)
    }

    fn rec(e: Edit, who: &str, sec: u32) -> EditRecord {
        EditRecord {
            edit: e,
            author: who.into(),
            time: format!("2026-12-04T10:00:{sec:02}Z"),
            note: None,
        }
    }

    fn reparent(n: &str, p: &str) -> Edit {
        Edit::Reparent {
            node: n.into(),
            parent: p.into(),
        }
    }

    #[test]
    fn separate_branches_merge_cleanly_ours_first() {
        let (t, tree) = project();
        let b = vec![rec(reparent("bulbs", "root"), "ana", 0)];
        let mut o = b.clone();
        o.push(rec(reparent("rake", "seeds"), "ana", 1));
        let mut th = b.clone();
        th.push(rec(
            Edit::Rename {
                node: "bulbs".into(),
                label: "Bulbs".into(),
                language: None,
            },
            "ben",
            2,
        ));
        let m = merge(&tree, &t, &b, &o, &th);
        assert!(m.is_clean(), "{:?}", m.conflicts);
        assert_eq!(m.edits, vec![b[0].clone(), o[1].clone(), th[1].clone()]);
        // merging a layer with itself changes nothing
        let same = merge(&tree, &t, &b, &o, &o);
        assert_eq!(same.edits, o);
        assert!(same.is_clean());
    }

    #[test]
    fn same_node_moved_to_different_parents_conflicts_with_both_choices() {
        let (t, tree) = project();
        let o = vec![rec(reparent("rake", "seeds"), "ana", 1)];
        let th = vec![rec(reparent("rake", "bulbs"), "ben", 2)];
        let m = merge(&tree, &t, &[], &o, &th);
        assert_eq!(m.conflicts.len(), 1);
        let c = &m.conflicts[0];
        assert_eq!(c.id, "c1");
        assert_eq!(c.kinds, vec!["placement".to_string()]);
        assert_eq!(c.ours, o);
        assert_eq!(c.theirs, th);
        assert!(c.if_ours[0].contains("under seeds"), "{:?}", c.if_ours);
        assert!(c.if_theirs[0].contains("under bulbs"), "{:?}", c.if_theirs);
        assert!(m.edits.is_empty());
        assert_eq!(m.take_all(Side::Theirs), th);
    }

    #[test]
    fn placement_choices_name_the_parent_each_side_chose() {
        let (t, tree) = project();
        let o = vec![rec(reparent("rake", "seeds"), "ana", 1)];
        let th = vec![rec(reparent("rake", "bulbs"), "ben", 2)];
        let m = merge(&tree, &t, &[], &o, &th);
        let ch = placement_choices(&tree, &t, &m.edits, &m.conflicts[0]);
        // expected parents are the ones the two reparent edits name
        let id = |s: &str| t.get(s).unwrap();
        assert_eq!(
            ch,
            vec![PlacementChoice {
                node: id("rake"),
                if_ours: Some(id("seeds")),
                if_theirs: Some(id("bulbs")),
            }]
        );
        // a label conflict has no placement to draw
        let o = vec![rec(
            Edit::Rename {
                node: "rake".into(),
                label: "Rake".into(),
                language: None,
            },
            "ana",
            1,
        )];
        let th = vec![rec(
            Edit::Rename {
                node: "rake".into(),
                label: "Lawn rake".into(),
                language: None,
            },
            "ben",
            2,
        )];
        let m = merge(&tree, &t, &[], &o, &th);
        assert_eq!(m.conflicts[0].kinds, vec!["label".to_string()]);
        assert!(placement_choices(&tree, &t, &m.edits, &m.conflicts[0]).is_empty());
    }

    #[test]
    fn exclude_against_review_and_cycles_conflict() {
        let (t, tree) = project();
        let o = vec![rec(
            Edit::Exclude {
                node: "spade".into(),
            },
            "ana",
            1,
        )];
        let th = vec![rec(
            Edit::Review {
                node: "spade".into(),
                status: ReviewStatus::Approved,
                comment: String::new(),
            },
            "ben",
            2,
        )];
        let m = merge(&tree, &t, &[], &o, &th);
        assert_eq!(m.conflicts[0].kinds, vec!["removed-vs-changed".to_string()]);
        // ours puts tools under seeds, theirs seeds under tools: each applies alone,
        // together they would make a cycle
        let o = vec![rec(reparent("tools", "seeds"), "ana", 1)];
        let th = vec![rec(reparent("seeds", "tools"), "ben", 2)];
        let m = merge(&tree, &t, &[], &o, &th);
        assert_eq!(m.conflicts.len(), 1);
        assert!(
            m.conflicts[0].kinds.contains(&"does-not-apply".to_string()),
            "{:?}",
            m.conflicts
        );
    }

    #[test]
    fn undone_base_edit_is_dropped_and_signoffs_are_history() {
        let (t, tree) = project();
        let b = vec![rec(reparent("bulbs", "root"), "ana", 0)];
        let o: Vec<EditRecord> = Vec::new(); // ours undid it
        let (eff, _) = apply(&tree, &t, &b);
        let sign = rec(
            super::super::signoff::signoff_edit(&eff, &t, "ben", 0),
            "ben",
            3,
        );
        let th = vec![b[0].clone(), sign.clone()];
        let m = merge(&tree, &t, &b, &o, &th);
        assert!(m.is_clean());
        assert_eq!(m.dropped, b);
        assert_eq!(m.edits, vec![sign]);
        assert_eq!(m.signed_by, None, "the merged tree is not the signed one");
    }
}
