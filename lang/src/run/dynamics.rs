//! Running the physical-time kinetics: the dynamics rule, `evolve`, `quench`, `step` commands.

use super::Runner;
use crate::ast::Span;
use crate::check::dynamics::DynamicsSpec;
use crate::diagnostic::CellError;
use crate::workspace::Model;
use crate::Output;

impl Runner<'_> {
    pub(super) fn run_dynamics(
        &mut self,
        spec: &DynamicsSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = (model, span, keyword, emit);
        match *spec {}
    }
}
