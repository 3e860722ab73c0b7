//! Checking of the monopole tracking (mean-square displacement, distinct sites) and reachable sites commands.
//!
//! Reads the phrase and options of a command statement, resolves names and units, and
//! returns a typed spec for `run/monopoles.rs`.

use super::{Checked, Checker, CommandSpec, View};
use crate::ast::{Arg, Ident, Opt, Statement};
use crate::diagnostic::{ErrorKind, Problem};

/// A resolved monopoles command.
#[derive(Clone, Debug, PartialEq)]
pub enum MonopolesSpec {}

impl Checker<'_> {
    pub(super) fn check_monopoles(
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
        None::<MonopolesSpec>.map(|spec| Checked::Command(CommandSpec::Monopoles(spec)))
    }
}
