//! One analysed version of a document: the text, its line index, the result of the one
//! analysis entry point (`sdeck_checks::check`) and the moments at the horizon. Every
//! feature of the server reads one of these; none computes anything of its own.

use crate::convert::Converter;
use crate::documents::{PositionEncoding, TextSnapshot};
use sdeck_checks::reuse::{Memo, Reuse, ReuseCounts};
use sdeck_checks::{FileCheck, RuleSettings};
use sdeck_report::{FactorReport, Levels};
use sdeck_semantics::{FactorId, ParamId, Symbol, SymbolKind};
use sdeck_syntax::ast::{Declaration, StatementKind};
use sdeck_syntax::LineIndex;
use std::path::Path;
use std::sync::{Arc, Mutex, OnceLock};
use tower_lsp::lsp_types::Url;

/// What the project that governs a document says about it.
#[derive(Clone, Debug, Default)]
pub struct ProjectSettings {
    /// The rule levels (the defaults without a project file, or when it is broken).
    pub settings: RuleSettings,
    /// Whether the project's `[files]` leave the file out: `sdeck check` skips it, so the
    /// editor shows no diagnostics for it either.
    pub excluded: bool,
    /// What is wrong with the project file, when it is broken.
    pub problem: Option<String>,
}

/// The settings for a document, through the same resolver as the CLI (the nearest
/// `sdeck.toml`); the defaults for a document not on disk.
pub fn project_settings(uri: &Url) -> ProjectSettings {
    let Ok(path) = uri.to_file_path() else {
        return ProjectSettings::default();
    };
    match sdeck_project::find_project(Path::new(&path)) {
        Ok(Some(project)) => ProjectSettings {
            excluded: project.is_excluded(&path),
            settings: project.settings,
            problem: None,
        },
        Ok(None) => ProjectSettings::default(),
        Err(e) => ProjectSettings {
            problem: Some(e.to_string()),
            ..ProjectSettings::default()
        },
    }
}

/// The quantiles the hover shows, at the horizon.
pub const HORIZON_QUANTILES: [f64; 3] = [0.05, 0.5, 0.95];

/// What the server asks of the report of `state`: [`HORIZON_QUANTILES`] (none by a
/// numerical inversion of a transform: a hover answers at once) and the probability of a
/// value below zero.
pub fn horizon_levels(state: FactorId) -> Levels {
    Levels {
        quantiles: HORIZON_QUANTILES.to_vec(),
        below: vec![(state, 0.0)],
        quantiles_by_inversion: false,
    }
}

/// What the analyses of one open document keep across its versions, by content key
/// (`sdeck_checks::reuse`): the derivation, the values of expectations and the reports of
/// factors at the horizon. It lives as long as the document is open.
#[derive(Debug, Default)]
pub struct DocumentMemo {
    pub checks: Reuse,
    reports: Mutex<Memo<Option<FactorReport>>>,
}

/// How much the analyses of a document computed and took over (the test-only document
/// request reports it).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct MemoCounts {
    pub checks: ReuseCounts,
    /// Reports of a factor at the horizon built.
    pub reports: u64,
    /// Reports taken over from an earlier version.
    pub reports_reused: u64,
}

impl DocumentMemo {
    fn reports(&self) -> std::sync::MutexGuard<'_, Memo<Option<FactorReport>>> {
        // A report is inserted whole once built: a poisoned lock guards whole data.
        self.reports.lock().unwrap_or_else(|p| p.into_inner())
    }

    /// A version's analysis has ended: forget the reports no request asked for since the
    /// version before.
    pub fn finish_version(&self) {
        self.reports().finish_version();
    }

    pub fn counts(&self) -> MemoCounts {
        let reports = self.reports();
        MemoCounts {
            checks: self.checks.counts(),
            reports: reports.computed,
            reports_reused: reports.reused,
        }
    }
}

/// A document's text at one version, analysed.
pub struct Analyzed {
    pub version: i32,
    pub text: String,
    pub index: LineIndex,
    pub check: FileCheck,
    /// Whether the project leaves the file out (no diagnostics are shown).
    pub excluded: bool,
    /// Per state, its report at the model's horizon (what `sdeck moments` prints by
    /// default), each built on first use: diagnostics do not need them.
    horizon: Vec<OnceLock<Option<FactorReport>>>,
    /// Per parameter, the roles it plays, found once per version on first use.
    roles: OnceLock<Vec<Vec<Role>>>,
    /// Every inlay hint of the version (offset, label), by offset; built on first use so
    /// that a request for a range costs that range.
    pub(crate) hints: OnceLock<Vec<(usize, String)>>,
    /// Every semantic token of the version (span, type, modifiers), by start, without
    /// overlaps; built on first use.
    pub(crate) tokens: OnceLock<Vec<(sdeck_diagnostics::Span, u32, u32)>>,
    /// What the document's analyses keep across versions.
    memo: Arc<DocumentMemo>,
}

impl Analyzed {
    /// Runs the analysis to its end (the tests' way in). The caller guards against panics.
    #[cfg(test)]
    pub fn compute(snapshot: TextSnapshot) -> Analyzed {
        let check = sdeck_checks::check(&snapshot.text, &snapshot.stem, &snapshot.project.settings);
        Analyzed::from_check(snapshot, check, Arc::default())
    }

    /// [`Analyzed::compute`], given up (`None`) as soon as `stale` answers yes at one of
    /// the check's cancellation points, taking over from `memo` what earlier versions of
    /// the document derived (and keeping there what this one derives).
    pub fn compute_unless_stale(
        snapshot: TextSnapshot,
        stale: &(dyn Fn() -> bool + Sync),
        memo: Arc<DocumentMemo>,
    ) -> Option<Analyzed> {
        let check = sdeck_checks::check_reusing(
            &snapshot.text,
            &snapshot.stem,
            &snapshot.project.settings,
            stale,
            &memo.checks,
        )
        .ok()?;
        memo.finish_version();
        Some(Analyzed::from_check(snapshot, check, memo))
    }

    fn from_check(
        snapshot: TextSnapshot,
        check: sdeck_checks::FileCheck,
        memo: Arc<DocumentMemo>,
    ) -> Analyzed {
        let excluded = snapshot.project.excluded;
        let index = LineIndex::new(&snapshot.text);
        let states = check.analysis.model.factors.len();
        Analyzed {
            version: snapshot.version,
            text: snapshot.text,
            index,
            check,
            excluded,
            horizon: (0..states).map(|_| OnceLock::new()).collect(),
            roles: OnceLock::new(),
            hints: OnceLock::new(),
            tokens: OnceLock::new(),
            memo,
        }
    }

    /// The diagnostics the editor shows: none for a file the project leaves out.
    pub fn shown_diagnostics(&self) -> &[sdeck_diagnostics::Diagnostic] {
        if self.excluded {
            &[]
        } else {
            &self.check.diagnostics
        }
    }

    /// The report of `state` at the horizon, with the quantiles and the probability below
    /// zero the hover shows ([`horizon_levels`]): built for that state only, on first use,
    /// and taken over by later versions while the state's content key is the same (an
    /// edit elsewhere leaves it). `None` when there is no such state.
    pub fn horizon_report(&self, state: FactorId) -> Option<&FactorReport> {
        self.horizon
            .get(state.index())?
            .get_or_init(|| {
                let key = self.check.keys.factors.get(state.index()).copied();
                let kept = key.and_then(|k| self.memo.reports().get(k));
                if let Some(report) = kept {
                    return report;
                }
                // Built off the lock: another request may read the memo meanwhile.
                let model = &self.check.analysis.model;
                let report = FactorReport::build(
                    model,
                    &self.check.derivation,
                    state,
                    model.horizon,
                    &horizon_levels(state),
                );
                if let Some(k) = key {
                    self.memo.reports().insert(k, report.clone());
                }
                report
            })
            .as_ref()
    }

    /// What the document's analyses computed and took over so far.
    #[cfg(test)]
    pub fn memo_counts(&self) -> MemoCounts {
        self.memo.counts()
    }

    pub fn converter(&self, encoding: PositionEncoding) -> Converter<'_> {
        Converter {
            text: &self.text,
            index: &self.index,
            encoding,
        }
    }

    /// The declared symbol named at `offset`, whether the cursor is on its declaration
    /// or on a use of it. The end of a name counts (the cursor just after it).
    pub fn symbol_at(&self, offset: usize) -> Option<&Symbol> {
        let analysis = &self.check.analysis;
        if let Some(s) = analysis
            .symbols
            .iter()
            .find(|s| s.name_span.start <= offset && offset <= s.name_span.end)
        {
            return Some(s);
        }
        let reference = analysis
            .references
            .iter()
            .find(|r| r.span.start <= offset && offset <= r.span.end)?;
        analysis
            .symbols
            .iter()
            .find(|s| s.name_span == reference.declaration)
    }

    /// Every span naming `symbol`: its declaration first, then its uses.
    pub fn occurrences(&self, symbol: &Symbol) -> Vec<sdeck_diagnostics::Span> {
        let mut spans = vec![symbol.name_span.clone()];
        spans.extend(
            self.check
                .analysis
                .references
                .iter()
                .filter(|r| r.declaration == symbol.name_span)
                .map(|r| r.span.clone()),
        );
        spans
    }

    /// The syntax of the `param` or `state` declaration of `name`.
    pub fn declaration(&self, kind: SymbolKind, name: &str) -> Option<&Declaration> {
        self.check
            .analysis
            .file
            .statements
            .iter()
            .find_map(|s| match (&s.kind, kind) {
                (StatementKind::Param(d), SymbolKind::Param)
                | (StatementKind::Factor(d), SymbolKind::Factor)
                    if d.name.name == name =>
                {
                    Some(d)
                }
                _ => None,
            })
    }

    /// The roles a parameter plays in the equations, with the state each concerns.
    pub fn roles_of_param(&self, param: ParamId) -> &[Role] {
        self.roles
            .get_or_init(|| self.all_roles())
            .get(param.index())
            .map(Vec::as_slice)
            .unwrap_or(&[])
    }

    /// The roles of every parameter, in one pass over the states.
    fn all_roles(&self) -> Vec<Vec<Role>> {
        let model = &self.check.analysis.model;
        let derivation = &self.check.derivation;
        let mut roles = vec![Vec::new(); model.params.len()];
        for (index, law) in derivation.states.iter().enumerate() {
            let state = FactorId::new(index);
            if let Some(terms) =
                sdeck_calculus::describe::square_root_terms(model, derivation, state)
            {
                let half_life = law.half_life;
                if let Some(slot) = terms.speed_param.and_then(|p| roles.get_mut(p.index())) {
                    slot.push(Role::Speed { state, half_life });
                }
                if let Some(slot) = terms.vol_param.and_then(|p| roles.get_mut(p.index())) {
                    slot.push(Role::Volatility { state });
                }
                continue;
            }
            // The speed of a factor whose own drift coefficient is −p, read from the
            // calculus as a parameter (never from the printed formula).
            let speed = sdeck_calculus::describe::drift_speed_param(derivation, state);
            if let Some(slot) = speed.and_then(|p| roles.get_mut(p.index())) {
                slot.push(Role::Speed {
                    state,
                    half_life: law.half_life,
                });
            }
        }
        roles
    }
}

/// What a parameter is to a state.
#[derive(Clone, Debug, PartialEq)]
pub enum Role {
    /// The speed of mean reversion, with the state's half-life (clock units) when known.
    Speed {
        state: FactorId,
        half_life: Option<f64>,
    },
    /// The volatility of a square-root state.
    Volatility { state: FactorId },
}
