//! Running the equilibrium runs beyond `scan`: annealing, tempering, structure factor commands.

use super::Runner;
use crate::ast::Span;
use crate::check::equilibrium::EquilibriumSpec;
use crate::diagnostic::CellError;
use crate::workspace::Model;
use crate::Output;

impl Runner<'_> {
    pub(super) fn run_equilibrium(
        &mut self,
        spec: &EquilibriumSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = (model, span, keyword, emit);
        match *spec {}
    }
}
