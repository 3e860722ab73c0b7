//! Running the time-series analysis and fits: spectra, autocorrelation, susceptibility, `fit` commands.

use super::Runner;
use crate::ast::Span;
use crate::check::analysis::AnalysisSpec;
use crate::diagnostic::CellError;
use crate::workspace::Model;
use crate::Output;

impl Runner<'_> {
    pub(super) fn run_analysis(
        &mut self,
        spec: &AnalysisSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = (model, span, keyword, emit);
        match *spec {}
    }
}
