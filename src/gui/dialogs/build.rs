//! Build (or rebuild) the base tree: the method (divisive or inclusion) and its parameters, a
//! worker thread with a progress bar and Cancel. The result becomes the new base tree; edits are re-applied and
//! the ones that no longer apply are listed.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, TryRecvError, channel};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;

use egui::{Id, Modal};

use crate::model::builder::{
    BuildError, BuildMethod, BuildParams, BuildProgress, BuiltTree, build,
};
use crate::model::inclusion::{InclusionError, InclusionParams, build_inclusion};
use crate::model::{Project, Similarity};

use super::super::context::{Action, ViewCtx};
use super::DialogOut;

/// A build running on a worker thread.
pub struct BuildJob {
    cancel: Arc<AtomicBool>,
    progress: Arc<Mutex<Option<BuildProgress>>>,
    result: Receiver<Result<BuiltTree, BuildError>>,
    handle: Option<JoinHandle<()>>,
}

impl BuildJob {
    /// Start building on a worker thread (the divisive method).
    pub fn start(project: &Project, params: BuildParams) -> Self {
        Self::start_with(project, BuildMethod::Divisive, params)
    }

    /// Start building on a worker thread with `method`. The inclusion method takes the seed
    /// from `params` and its own defaults otherwise (no depth or fan-out limit).
    pub fn start_with(project: &Project, method: BuildMethod, params: BuildParams) -> Self {
        Self::start_limited(project, method, params, (None, None))
    }

    /// As [`BuildJob::start_with`], with the inclusion method's (depth, fan-out) limits.
    pub fn start_limited(
        project: &Project,
        method: BuildMethod,
        params: BuildParams,
        limits: (Option<usize>, Option<usize>),
    ) -> Self {
        let cancel = Arc::new(AtomicBool::new(false));
        let progress = Arc::new(Mutex::new(None));
        let (tx, rx) = channel();
        let g = Arc::clone(&project.gaussians);
        let phrases = project.phrases.clone();
        let (c, p) = (Arc::clone(&cancel), Arc::clone(&progress));
        let handle = std::thread::spawn(move || {
            let report = move |bp: BuildProgress| {
                if let Ok(mut slot) = p.lock() {
                    *slot = Some(bp);
                }
            };
            let r = match method {
                BuildMethod::Divisive => build(&g, &phrases, None, &params, &report, &c),
                BuildMethod::Inclusion => {
                    let ip = InclusionParams {
                        seed: params.seed,
                        max_depth: limits.0,
                        max_fanout: limits.1,
                        ..InclusionParams::default()
                    };
                    inclusion(&g, &phrases, ip, &report, &c)
                }
            };
            // the dialog may have been closed; nobody listening is fine
            let _ = tx.send(r);
        });
        BuildJob {
            cancel,
            progress,
            result: rx,
            handle: Some(handle),
        }
    }

    /// Ask the worker to stop.
    pub fn cancel(&self) {
        self.cancel.store(true, Ordering::Relaxed);
    }

    /// Latest progress report.
    pub fn progress(&self) -> Option<BuildProgress> {
        self.progress.lock().ok().and_then(|p| *p)
    }

    /// The result, once the worker finished.
    pub fn poll(&mut self) -> Option<Result<BuiltTree, BuildError>> {
        match self.result.try_recv() {
            Ok(r) => {
                if let Some(h) = self.handle.take() {
                    let _ = h.join();
                }
                Some(r)
            }
            Err(TryRecvError::Empty) => None,
            Err(TryRecvError::Disconnected) => Some(Err(BuildError::Cancelled)),
        }
    }
}

/// An inclusion build reported in the divisive build's terms (progress as phrases placed).
fn inclusion(
    g: &crate::model::Gaussians,
    phrases: &crate::model::PhraseTable,
    params: InclusionParams,
    report: &(dyn Fn(BuildProgress) + Sync),
    cancel: &AtomicBool,
) -> Result<BuiltTree, BuildError> {
    let failed = |e: InclusionError| match e {
        InclusionError::Cancelled => BuildError::Cancelled,
        other => BuildError::Inclusion(other),
    };
    let params = params.check().map_err(failed)?;
    let progress = |p: crate::model::inclusion::InclusionProgress| {
        report(BuildProgress {
            placed: p.done,
            total: p.total,
            depth: 0,
        })
    };
    build_inclusion(g, phrases, None, &[], &params, &progress, cancel)
        .map(|t| t.into_built(g, phrases, &params))
        .map_err(failed)
}

impl Drop for BuildJob {
    fn drop(&mut self) {
        self.cancel();
    }
}

/// State of the build dialog.
pub struct BuildDialog {
    /// The method chosen in the dialog.
    pub method: BuildMethod,
    /// The parameters edited in the dialog.
    pub params: BuildParams,
    /// The inclusion method's depth limit (None: no limit).
    pub inclusion_max_depth: Option<usize>,
    /// The inclusion method's fan-out limit (None: no limit).
    pub inclusion_max_fanout: Option<usize>,
    job: Option<BuildJob>,
    outcome: Option<String>,
    built: Option<BuiltTree>,
}

impl BuildDialog {
    /// Start with the builder's defaults.
    pub fn new(_view: &ViewCtx) -> Self {
        BuildDialog {
            // the default method since issue 14 (README "Two methods")
            method: BuildMethod::Inclusion,
            params: BuildParams::default(),
            inclusion_max_depth: None,
            inclusion_max_fanout: None,
            job: None,
            outcome: None,
            built: None,
        }
    }

    /// Whether a build is running.
    pub fn is_running(&self) -> bool {
        self.job.is_some()
    }

    fn params_ui(&mut self, ui: &mut egui::Ui) {
        for m in BuildMethod::ALL {
            ui.radio_value(&mut self.method, m, m.name())
                .on_hover_text(m.explanation());
        }
        ui.label(egui::RichText::new(self.method.explanation()).small());
        let p = &mut self.params;
        if self.method == BuildMethod::Inclusion {
            egui::Grid::new("build-params")
                .num_columns(2)
                .show(ui, |ui| {
                    let l = ui.label("Seed");
                    ui.add(egui::DragValue::new(&mut p.seed)).labelled_by(l.id);
                    ui.end_row();
                    for (label, limit, lo, hi, default) in [
                        (
                            "Depth limit",
                            &mut self.inclusion_max_depth,
                            1,
                            crate::model::inclusion::MAX_DEPTH_LIMIT,
                            6,
                        ),
                        (
                            "Fan-out limit",
                            &mut self.inclusion_max_fanout,
                            1,
                            100_000,
                            20,
                        ),
                    ] {
                        let mut on = limit.is_some();
                        if ui.checkbox(&mut on, label).changed() {
                            *limit = on.then_some(limit.unwrap_or(default));
                        }
                        if let Some(v) = limit {
                            ui.add(egui::DragValue::new(v).range(lo..=hi))
                                .on_hover_text(format!("{label} ({lo} … {hi})"));
                        } else {
                            ui.label("none");
                        }
                        ui.end_row();
                    }
                });
            return;
        }
        egui::Grid::new("build-params")
            .num_columns(2)
            .show(ui, |ui| {
                let l = ui.label("Seed");
                ui.add(egui::DragValue::new(&mut p.seed)).labelled_by(l.id);
                ui.end_row();
                let l = ui.label("Maximum depth");
                ui.add(egui::DragValue::new(&mut p.max_depth).range(1..=64))
                    .labelled_by(l.id);
                ui.end_row();
                let l = ui.label("Largest k tried per node");
                ui.add(egui::DragValue::new(&mut p.k_max).range(2..=64))
                    .labelled_by(l.id);
                ui.end_row();
                let l = ui.label("Smallest cluster");
                ui.add(egui::DragValue::new(&mut p.min_cluster).range(1..=10_000))
                    .labelled_by(l.id);
                ui.end_row();
                ui.label("Similarity");
                egui::ComboBox::new("build-sim", "measure")
                    .selected_text(p.similarity.as_str())
                    .show_ui(ui, |ui| {
                        for s in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
                            ui.selectable_value(&mut p.similarity, s, s.as_str());
                        }
                    });
                ui.end_row();
                let l = ui.label("k-means restarts");
                ui.add(egui::DragValue::new(&mut p.kmeans_restarts).range(1..=50))
                    .labelled_by(l.id);
                ui.end_row();
                let l = ui.label("Knee sensitivity S");
                ui.add(
                    egui::DragValue::new(&mut p.sensitivity)
                        .range(0.0..=10.0)
                        .speed(0.05),
                )
                .labelled_by(l.id);
                ui.end_row();
                let l = ui.label("Variance weight");
                ui.add(
                    egui::DragValue::new(&mut p.with_variance)
                        .range(0.0..=10.0)
                        .speed(0.05),
                )
                .labelled_by(l.id);
                ui.end_row();
            });
    }

    /// Draw it.
    pub fn ui(&mut self, ctx: &egui::Context, view: &ViewCtx) -> DialogOut {
        let mut out = DialogOut::default();
        if let Some(job) = &mut self.job
            && let Some(r) = job.poll()
        {
            self.job = None;
            match r {
                Ok(built) => {
                    self.outcome = Some(format!(
                        "Built a tree of {} nodes.",
                        built.tree_file.parent.len() + 1
                    ));
                    self.built = Some(built);
                }
                Err(BuildError::Cancelled) => self.outcome = Some("Build cancelled.".into()),
                Err(e) => self.outcome = Some(format!("Build failed: {e}")),
            }
        }
        let resp = Modal::new(Id::unique("build-dialog")).show(ctx, |ui| {
            ui.set_width(420.0);
            ui.heading("Build tree");
            ui.label(format!(
                "{} phrases. Your edits are kept and re-applied to the new tree.",
                view.project.phrases.len()
            ));
            ui.add_enabled_ui(self.job.is_none(), |ui| self.params_ui(ui));
            ui.separator();
            if let Some(job) = &self.job {
                let (frac, text) = match job.progress() {
                    Some(p) if p.total > 0 => (
                        p.placed as f32 / p.total as f32,
                        format!("{} / {} placed, depth {}", p.placed, p.total, p.depth),
                    ),
                    _ => (0.0, "starting…".to_string()),
                };
                ui.add(egui::ProgressBar::new(frac).text(text).animate(true));
                if ui.button("Cancel build").clicked() {
                    job.cancel();
                }
            } else {
                if let Some(o) = &self.outcome {
                    ui.label(o);
                }
                ui.horizontal(|ui| {
                    if ui.button("Start build").clicked() {
                        self.outcome = None;
                        self.built = None;
                        self.job = Some(BuildJob::start_limited(
                            view.project,
                            self.method,
                            self.params.clone(),
                            (self.inclusion_max_depth, self.inclusion_max_fanout),
                        ));
                    }
                    if let Some(b) = &self.built
                        && ui
                            .button("Use this tree")
                            .on_hover_text(
                                "Writes tree.json (the old one is kept as tree.json.bak)",
                            )
                            .clicked()
                    {
                        out = DialogOut::act(vec![Action::NewBase(
                            Box::new(b.tree_file.clone()),
                            Box::new(Some(b.report.clone())),
                        )]);
                    }
                    if ui.button("Close").clicked() {
                        out = DialogOut::close();
                    }
                });
            }
        });
        if resp.should_close() && self.job.is_none() {
            out.close = true;
        }
        out
    }
}
