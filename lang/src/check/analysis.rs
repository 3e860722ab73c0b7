//! Checking of the time-series analysis and fits: spectra, autocorrelation, susceptibility, `fit` commands.
//!
//! Reads the phrase and options of a command statement, resolves names and units, and
//! returns a typed spec for `run/analysis.rs`.

use super::{Checked, Checker, CommandSpec, View};
use crate::ast::{Arg, Ident, Opt, Statement};
use crate::diagnostic::{ErrorKind, Problem};

/// A resolved analysis command.
#[derive(Clone, Debug, PartialEq)]
pub enum AnalysisSpec {}

impl Checker<'_> {
    pub(super) fn check_analysis(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let _ = (target, args, options, view);
        self.push(Problem::new(
            ErrorKind::NotImplemented,
            statement.keyword.span,
            format!("`{}` is not runnable yet", statement.keyword.name),
        ));
        None::<AnalysisSpec>.map(|spec| Checked::Command(CommandSpec::Analysis(spec)))
    }
}
