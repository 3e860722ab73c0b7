//! Checking of the physical-time kinetics: the dynamics rule, `evolve`, `quench`, `step` commands.
//!
//! Reads the phrase and options of a command statement, resolves names and units, and
//! returns a typed spec for `run/dynamics.rs`.

use super::{Checked, Checker, CommandSpec, View};
use crate::ast::{Arg, Ident, Opt, Statement};
use crate::diagnostic::{ErrorKind, Problem};
use crate::workspace::Model;

/// A resolved dynamics command.
#[derive(Clone, Debug, PartialEq)]
pub enum DynamicsSpec {}

impl DynamicsSpec {
    /// The model change a `dynamics` statement makes (see `CommandSpec::declare`).
    pub fn declare(&self, model: &mut Model) {
        let _ = model;
        match *self {}
    }
}

impl Checker<'_> {
    pub(super) fn check_dynamics(
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
        None::<DynamicsSpec>.map(|spec| Checked::Command(CommandSpec::Dynamics(spec)))
    }
}
