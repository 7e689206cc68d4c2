//! The tree panel: an expandable, virtualised list of the effective tree's nodes with a
//! search box, badges, multi-selection, keyboard navigation, drag-to-reparent and a
//! context menu. It never changes the tree: it returns [`Action`]s.

use egui::{Color32, Key, Modifiers, RichText, Sense, vec2};

use crate::model::edit::{Edit, ReviewStatus};
use crate::model::{PhraseId, Tree};

use super::badges;
use super::context::{Action, DialogRequest, Panel, PanelKind, PickerKind, ViewCtx};

/// Height of one row in points (without item spacing).
pub const ROW_HEIGHT: f32 = 20.0;

/// State of the tree panel: which nodes are expanded, the search, and the flattened rows.
pub struct TreePanel {
    expanded: Vec<bool>,
    rows: Vec<(PhraseId, u32)>,
    /// The tree generation the rows were computed for.
    rows_for: Option<u64>,
    dirty: bool,
    /// Search text.
    pub query: String,
    query_for: String,
    matches: Vec<PhraseId>,
    is_match: Vec<bool>,
    match_cursor: usize,
    scroll_to: Option<PhraseId>,
    outside: (Vec<PhraseId>, Vec<PhraseId>),
    outside_for: Option<u64>,
    /// Impact preview of the drop under the pointer: (generation, edit, lines).
    drop_preview: Option<(u64, Edit, Vec<String>)>,
}

impl TreePanel {
    /// A panel for a phrase table of `n` rows with `root` expanded.
    pub fn new(n: usize, root: Option<PhraseId>) -> Self {
        let mut expanded = vec![false; n];
        if let Some(r) = root {
            expanded[r as usize] = true;
        }
        TreePanel {
            expanded,
            rows: Vec::new(),
            rows_for: None,
            dirty: true,
            query: String::new(),
            query_for: String::new(),
            matches: Vec::new(),
            is_match: vec![false; n],
            match_cursor: 0,
            scroll_to: None,
            outside: (Vec::new(), Vec::new()),
            outside_for: None,
            drop_preview: None,
        }
    }

    /// Whether a node is expanded.
    pub fn is_expanded(&self, p: PhraseId) -> bool {
        self.expanded.get(p as usize).copied().unwrap_or(false)
    }

    /// Expand or collapse a node.
    pub fn set_expanded(&mut self, p: PhraseId, open: bool) {
        if let Some(e) = self.expanded.get_mut(p as usize) {
            *e = open;
            self.dirty = true;
        }
    }

    /// Expand every node.
    pub fn expand_all(&mut self) {
        self.expanded.iter_mut().for_each(|e| *e = true);
        self.dirty = true;
    }

    /// Collapse every node but the root.
    pub fn collapse_all(&mut self, tree: &Tree) {
        self.expanded.iter_mut().for_each(|e| *e = false);
        self.expanded[tree.root() as usize] = true;
        self.dirty = true;
    }

    /// Expand the ancestors of `p` and scroll it into view on the next frame.
    pub fn reveal(&mut self, tree: &Tree, p: PhraseId) {
        if !tree.is_placed(p) {
            return;
        }
        for a in tree.ancestors(p) {
            self.expanded[a as usize] = true;
        }
        self.dirty = true;
        self.scroll_to = Some(p);
    }

    /// Phrases matching the current search, in tree order.
    pub fn matches(&self) -> &[PhraseId] {
        &self.matches
    }

    /// Rows currently shown (node, depth), recomputed only when the tree, the expansion or
    /// the search changed.
    pub fn visible_rows(&mut self, ctx: &ViewCtx) -> &[(PhraseId, u32)] {
        let Some(eff) = ctx.eff else {
            self.rows.clear();
            return &self.rows;
        };
        let tree = &eff.tree;
        if self.query != self.query_for || self.rows_for != Some(ctx.generation) {
            self.refresh_matches(ctx);
        }
        if self.dirty || self.rows_for != Some(ctx.generation) {
            self.rows.clear();
            let filtering = !self.query.trim().is_empty();
            let mut keep = Vec::new();
            if filtering {
                // a node is shown when it matches or has a matching descendant
                keep = vec![false; self.expanded.len()];
                for &m in &self.matches {
                    let mut cur = Some(m);
                    while let Some(x) = cur {
                        if keep[x as usize] {
                            break;
                        }
                        keep[x as usize] = true;
                        cur = tree.parent(x);
                    }
                }
            }
            let mut stack = vec![(tree.root(), 0u32)];
            while let Some((x, depth)) = stack.pop() {
                if filtering && !keep[x as usize] {
                    continue;
                }
                self.rows.push((x, depth));
                if filtering || self.expanded[x as usize] {
                    for &c in tree.children(x).iter().rev() {
                        stack.push((c, depth + 1));
                    }
                }
            }
            self.dirty = false;
            self.rows_for = Some(ctx.generation);
        }
        &self.rows
    }

    fn refresh_matches(&mut self, ctx: &ViewCtx) {
        self.query_for = self.query.clone();
        self.matches.clear();
        self.is_match.iter_mut().for_each(|m| *m = false);
        self.match_cursor = 0;
        self.dirty = true;
        let q = self.query.trim().to_lowercase();
        let Some(eff) = ctx.eff else { return };
        if q.is_empty() {
            return;
        }
        // labels in every language, compared after NFC and case folding
        let qf = crate::model::lang::fold(self.query.trim(), None);
        for p in eff.tree.preorder() {
            let hit = eff.any_label_contains(p, &qf)
                || ctx.project.phrases.id(p).contains(&q)
                || eff.aliases[p as usize]
                    .iter()
                    .any(|&a| eff.any_label_contains(a, &qf));
            if hit {
                self.matches.push(p);
                self.is_match[p as usize] = true;
            }
        }
    }

    /// Keyboard navigation over the visible rows (arrows, Home/End, F2, Delete).
    fn keyboard(&mut self, ui: &egui::Ui, ctx: &ViewCtx, actions: &mut Vec<Action>) {
        let Some(eff) = ctx.eff else { return };
        if ui.ctx().egui_wants_keyboard_input() {
            return;
        }
        let tree = &eff.tree;
        let (up, down, left, right, home, end, f2, del) = ui.ctx().input_mut(|i| {
            (
                i.consume_key(Modifiers::NONE, Key::ArrowUp),
                i.consume_key(Modifiers::NONE, Key::ArrowDown),
                i.consume_key(Modifiers::NONE, Key::ArrowLeft),
                i.consume_key(Modifiers::NONE, Key::ArrowRight),
                i.consume_key(Modifiers::NONE, Key::Home),
                i.consume_key(Modifiers::NONE, Key::End),
                i.consume_key(Modifiers::NONE, Key::F2),
                i.consume_key(Modifiers::NONE, Key::Delete),
            )
        });
        if !(up || down || left || right || home || end || f2 || del) {
            return;
        }
        let cur = ctx.selection.last().copied();
        let pos = cur.and_then(|c| self.rows.iter().position(|r| r.0 == c));
        let go = |row: usize, this: &mut Self, actions: &mut Vec<Action>| {
            if let Some(&(p, _)) = this.rows.get(row) {
                actions.push(Action::Select(p));
                this.scroll_to = Some(p);
            }
        };
        match pos {
            None => {
                if (up || down || home || end) && !self.rows.is_empty() {
                    go(0, self, actions);
                }
            }
            Some(i) => {
                if up && i > 0 {
                    go(i - 1, self, actions);
                }
                if down {
                    go(i + 1, self, actions);
                }
                if home {
                    go(0, self, actions);
                }
                if end {
                    go(self.rows.len().saturating_sub(1), self, actions);
                }
                let p = self.rows[i].0;
                if left {
                    if self.is_expanded(p) && !tree.children(p).is_empty() {
                        self.set_expanded(p, false);
                    } else if let Some(parent) = tree.parent(p) {
                        actions.push(Action::Select(parent));
                        self.scroll_to = Some(parent);
                    }
                }
                if right && !tree.children(p).is_empty() {
                    if self.is_expanded(p) {
                        go(i + 1, self, actions);
                    } else {
                        self.set_expanded(p, true);
                    }
                }
                if f2 {
                    actions.push(Action::Dialog(DialogRequest::Rename(p)));
                }
                if del && p != tree.root() {
                    actions.push(Action::Edit(Edit::Exclude {
                        node: ctx.project.phrases.id(p).to_string(),
                    }));
                }
            }
        }
    }

    /// Phrases outside the tree: unplaced ones can be placed, excluded ones included again.
    fn outside_ui(&mut self, ui: &mut egui::Ui, ctx: &ViewCtx, actions: &mut Vec<Action>) {
        if self.outside_for != Some(ctx.generation) {
            self.outside = ctx.queries.outside();
            self.outside_for = Some(ctx.generation);
        }
        let (excluded, unplaced) = &self.outside;
        if excluded.is_empty() && unplaced.is_empty() {
            return;
        }
        if ctx.eff.is_none() {
            return;
        }
        egui::CollapsingHeader::new(format!(
            "Outside the tree: {} unplaced, {} excluded",
            unplaced.len(),
            excluded.len()
        ))
        .id_salt("outside-tree")
        .show(ui, |ui| {
            egui::ScrollArea::vertical()
                .id_salt("outside-rows")
                .max_height(140.0)
                .show(ui, |ui| {
                    for &p in unplaced {
                        ui.horizontal(|ui| {
                            ui.label(badges::pill("unplaced", badges::YELLOW));
                            let r = ui.selectable_label(
                                ctx.selection.contains(&p),
                                super::fonts::display_label(ctx.label(p)),
                            );
                            if r.clicked() {
                                actions.push(Action::Select(p));
                            }
                            if ui
                                .small_button("Place under…")
                                .on_hover_text("Choose a parent for this phrase")
                                .clicked()
                            {
                                actions.push(Action::Dialog(DialogRequest::Picker(
                                    PickerKind::Reparent,
                                    p,
                                )));
                            }
                        });
                    }
                    for &p in excluded {
                        ui.horizontal(|ui| {
                            ui.label(badges::pill("excluded", Color32::from_gray(190)));
                            let r = ui.selectable_label(
                                ctx.selection.contains(&p),
                                super::fonts::display_label(ctx.label(p)),
                            );
                            if r.clicked() {
                                actions.push(Action::Select(p));
                            }
                            if ui.small_button("Include").clicked() {
                                actions.push(Action::Edit(Edit::Include {
                                    node: ctx.project.phrases.id(p).to_string(),
                                }));
                            }
                        });
                    }
                });
        });
    }

    /// Rows from the selection anchor to `row` (Shift-click).
    fn range_to(&self, ctx: &ViewCtx, row: usize) -> Vec<PhraseId> {
        let anchor = ctx
            .selection
            .first()
            .and_then(|a| self.rows.iter().position(|r| r.0 == *a))
            .unwrap_or(row);
        let (a, b) = if anchor <= row {
            (anchor, row)
        } else {
            (row, anchor)
        };
        let mut v: Vec<PhraseId> = self.rows[a..=b].iter().map(|r| r.0).collect();
        // keep the anchor first so later Shift-clicks extend from it
        if anchor > row {
            v.reverse();
        }
        v
    }
}

impl Panel for TreePanel {
    fn kind(&self) -> PanelKind {
        PanelKind::Tree
    }

    fn ui(&mut self, ui: &mut egui::Ui, ctx: &ViewCtx) -> Vec<Action> {
        let mut actions = Vec::new();
        ui.heading("Hierarchy");
        let Some(eff) = ctx.eff else {
            ui.label("This project has no tree yet. Use Tree > Build tree… to build one.");
            return actions;
        };
        let tree = &eff.tree;
        let search = ui
            .horizontal(|ui| {
                ui.label("Search:");
                // right to left: the button first, then the field takes exactly what is left
                // (a fixed width here would make the resizable panel grow every frame)
                ui.with_layout(egui::Layout::right_to_left(egui::Align::Center), |ui| {
                    if ui
                        .small_button("Clear")
                        .on_hover_text("Clear the search")
                        .clicked()
                    {
                        self.query.clear();
                    }
                    ui.add(
                        egui::TextEdit::singleline(&mut self.query)
                            .hint_text("label or id (Ctrl+F)")
                            .desired_width(f32::INFINITY),
                    )
                })
                .inner
            })
            .inner;
        if ctx.focus_search {
            search.request_focus();
        }
        let _ = self.visible_rows(ctx);
        if !self.query.trim().is_empty() {
            ui.horizontal(|ui| {
                ui.label(format!("{} match(es)", self.matches.len()));
                let enter = search.lost_focus() && ui.input(|i| i.key_pressed(Key::Enter));
                if (ui.button("Next match").clicked() || enter) && !self.matches.is_empty() {
                    let p = self.matches[self.match_cursor % self.matches.len()];
                    self.match_cursor += 1;
                    actions.push(Action::Select(p));
                    self.scroll_to = Some(p);
                }
            });
        }
        self.outside_ui(ui, ctx, &mut actions);
        ui.separator();
        self.keyboard(ui, ctx, &mut actions);
        let _ = self.visible_rows(ctx);

        let row_h = ROW_HEIGHT + ui.spacing().item_spacing.y;
        let mut area = egui::ScrollArea::vertical()
            .id_salt("tree-rows")
            .auto_shrink([false, false]);
        if let Some(target) = self.scroll_to.take()
            && let Some(i) = self.rows.iter().position(|r| r.0 == target)
        {
            let view_h = ui.available_height();
            area = area.vertical_scroll_offset((i as f32 * row_h - view_h / 2.0).max(0.0));
        }
        let mut drop_preview = self.drop_preview.take();
        let rows = &self.rows;
        let mut toggles = Vec::new();
        area.show_rows(ui, ROW_HEIGHT, rows.len(), |ui, range| {
            for (i, &(p, depth)) in rows[range.clone()].iter().enumerate() {
                let row_index = range.start + i;
                ui.horizontal(|ui| {
                    ui.set_height(ROW_HEIGHT);
                    ui.add_space(depth as f32 * 14.0);
                    let kids = tree.children(p).len();
                    if kids > 0 {
                        let open = self.expanded[p as usize] || !self.query.trim().is_empty();
                        if expander(ui, open).clicked() {
                            toggles.push((p, !open));
                        }
                    } else {
                        ui.add_space(16.0 + ui.spacing().item_spacing.x);
                    }
                    if let Some(sev) = ctx.worst.get(p as usize).copied().flatten() {
                        let (t, tip) = badges::severity(sev);
                        ui.label(t).on_hover_text(tip);
                    }
                    if let Some((t, tip)) = badges::review(eff.review[p as usize]) {
                        ui.label(t).on_hover_text(tip);
                    }
                    if eff.pinned[p as usize] {
                        let (t, tip) = badges::pinned();
                        ui.label(t).on_hover_text(tip);
                    }
                    let n_alias = eff.aliases[p as usize].len();
                    if n_alias > 0 {
                        let (t, tip) = badges::aliases(n_alias);
                        ui.label(t).on_hover_text(tip);
                    }
                    let label = super::fonts::display_label(ctx.label(p));
                    let mut text = RichText::new(if kids > 0 {
                        format!("{label}  ({kids})")
                    } else {
                        label.to_string()
                    });
                    if self.is_match[p as usize] {
                        text = text.underline().strong();
                    }
                    let selected = ctx.selection.contains(&p);
                    let r = ui
                        .selectable_label(selected, text)
                        .interact(Sense::click_and_drag());
                    r.dnd_set_drag_payload(p);
                    if let Some(dragged) = r.dnd_release_payload::<PhraseId>() {
                        let dragged = *dragged;
                        if dragged != p {
                            actions.push(Action::Edit(Edit::Reparent {
                                node: ctx.project.phrases.id(dragged).to_string(),
                                parent: ctx.project.phrases.id(p).to_string(),
                            }));
                        }
                    } else if let Some(dragged) = r.dnd_hover_payload::<PhraseId>()
                        && *dragged != p
                    {
                        let edit = Edit::Reparent {
                            node: ctx.project.phrases.id(*dragged).to_string(),
                            parent: ctx.project.phrases.id(p).to_string(),
                        };
                        let tip = match ctx.check(&edit) {
                            Ok(()) => {
                                // the impact preview, once per target and tree
                                let fresh = matches!(&drop_preview,
                                    Some((g, e, _)) if *g == ctx.generation && *e == edit);
                                if !fresh {
                                    let lines = ctx
                                        .queries
                                        .preview(&edit)
                                        .map(|i| i.lines())
                                        .unwrap_or_default();
                                    drop_preview = Some((ctx.generation, edit.clone(), lines));
                                }
                                let lines = drop_preview
                                    .as_ref()
                                    .map(|d| d.2.join("\n"))
                                    .unwrap_or_default();
                                format!("Drop to move under \"{label}\"\n{lines}")
                            }
                            Err(why) => badges::plain(&format!("Cannot drop here: {why}")),
                        };
                        r.show_tooltip_text(tip);
                    }
                    if r.clicked() {
                        let m = ui.input(|i| i.modifiers);
                        if m.shift {
                            actions.push(Action::SelectMany(self.range_to(ctx, row_index)));
                        } else if m.command {
                            actions.push(Action::ToggleSelect(p));
                        } else {
                            actions.push(Action::Select(p));
                        }
                    }
                    r.context_menu(|ui| {
                        context_menu(ui, ctx, p, &mut actions);
                    });
                });
            }
        });
        self.drop_preview = drop_preview;
        for (p, open) in toggles {
            self.set_expanded(p, open);
        }
        actions
    }
}

/// The expand / collapse triangle, painted (no font glyph needed).
fn expander(ui: &mut egui::Ui, open: bool) -> egui::Response {
    let (rect, resp) = ui.allocate_exact_size(vec2(16.0, ROW_HEIGHT), Sense::click());
    let what = if open { "Collapse" } else { "Expand" };
    resp.widget_info(|| egui::WidgetInfo::labeled(egui::Role::Button, true, what));
    let c = rect.center();
    let s = 4.5;
    let pts = if open {
        vec![
            c + vec2(-s, -0.6 * s),
            c + vec2(s, -0.6 * s),
            c + vec2(0.0, 0.8 * s),
        ]
    } else {
        vec![
            c + vec2(-0.6 * s, -s),
            c + vec2(-0.6 * s, s),
            c + vec2(0.8 * s, 0.0),
        ]
    };
    let colour = ui.style().interact(&resp).fg_stroke.color;
    ui.painter()
        .add(egui::Shape::convex_polygon(pts, colour, egui::Stroke::NONE));
    resp.on_hover_text(what)
}

/// The right-click menu of a row.
fn context_menu(ui: &mut egui::Ui, ctx: &ViewCtx, p: PhraseId, actions: &mut Vec<Action>) {
    let Some(eff) = ctx.eff else { return };
    let id = ctx.project.phrases.id(p).to_string();
    let is_root = p == eff.tree.root();
    if eff.pinned[p as usize] {
        if ui.button("Unpin").clicked() {
            actions.push(Action::Edit(Edit::Unpin { node: id.clone() }));
            ui.close();
        }
    } else if let Some(parent) = eff.tree.parent(p)
        && ui.button("Pin to its parent").clicked()
    {
        actions.push(Action::Edit(Edit::Pin {
            node: id.clone(),
            parent: ctx.project.phrases.id(parent).to_string(),
        }));
        ui.close();
    }
    if ui
        .add_enabled(!is_root, egui::Button::new("Reparent to…"))
        .clicked()
    {
        actions.push(Action::Dialog(DialogRequest::Picker(
            PickerKind::Reparent,
            p,
        )));
        ui.close();
    }
    if ui
        .add_enabled(!is_root, egui::Button::new("Merge into…"))
        .clicked()
    {
        actions.push(Action::Dialog(DialogRequest::Picker(PickerKind::Merge, p)));
        ui.close();
    }
    if ui.button("Rename… (F2)").clicked() {
        actions.push(Action::Dialog(DialogRequest::Rename(p)));
        ui.close();
    }
    if !is_root && ui.button("Exclude (Del)").clicked() {
        actions.push(Action::Edit(Edit::Exclude { node: id.clone() }));
        ui.close();
    }
    ui.separator();
    if ui.button("Mark approved…").clicked() {
        actions.push(Action::Dialog(DialogRequest::Review(
            p,
            ReviewStatus::Approved,
        )));
        ui.close();
    }
    if ui.button("Mark to fix…").clicked() {
        actions.push(Action::Dialog(DialogRequest::Review(
            p,
            ReviewStatus::ToFix,
        )));
        ui.close();
    }
    ui.separator();
    if ui.button("Select with children").clicked() {
        let mut v = vec![p];
        v.extend_from_slice(eff.tree.children(p));
        actions.push(Action::SelectMany(v));
        ui.close();
    }
}
