//! Checking of the equilibrium runs beyond `scan`: annealing, tempering, structure factor commands.
//!
//! Reads the phrase and options of a command statement, resolves names and units, and
//! returns a typed spec for `run/equilibrium.rs`.

use super::{Checked, Checker, CommandSpec, View};
use crate::ast::{Arg, Ident, Opt, Statement};
use crate::diagnostic::{ErrorKind, Problem};

/// A resolved equilibrium command.
#[derive(Clone, Debug, PartialEq)]
pub enum EquilibriumSpec {}

impl Checker<'_> {
    pub(super) fn check_equilibrium(
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
        None::<EquilibriumSpec>.map(|spec| Checked::Command(CommandSpec::Equilibrium(spec)))
    }
}
