//! Running the monopole tracking (mean-square displacement, distinct sites) and reachable sites commands.

use super::Runner;
use crate::ast::Span;
use crate::check::monopoles::MonopolesSpec;
use crate::diagnostic::CellError;
use crate::workspace::Model;
use crate::Output;

impl Runner<'_> {
    pub(super) fn run_monopoles(
        &mut self,
        spec: &MonopolesSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = (model, span, keyword, emit);
        match *spec {}
    }
}
