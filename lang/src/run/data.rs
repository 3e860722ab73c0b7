//! Running the measured data: `import`, overlays, calibration of the attempt time commands.

use super::Runner;
use crate::ast::Span;
use crate::check::data::DataSpec;
use crate::diagnostic::CellError;
use crate::workspace::Model;
use crate::Output;

impl Runner<'_> {
    pub(super) fn run_data(
        &mut self,
        spec: &DataSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = (model, span, keyword, emit);
        match *spec {}
    }
}
