//! Running the the percolation toolkit commands.

use super::Runner;
use crate::ast::Span;
use crate::check::percolation::PercolationSpec;
use crate::diagnostic::CellError;
use crate::workspace::Model;
use crate::Output;

impl Runner<'_> {
    pub(super) fn run_percolation(
        &mut self,
        spec: &PercolationSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = (model, span, keyword, emit);
        match *spec {}
    }
}
