//! Handler of `check M`: the assumption checks of a fitted model.

use super::{Outcome, Session};
use crate::diagnostic::Diagnostic;
use crate::lang::Spanned;

impl Session<'_> {
    pub(super) fn check(&mut self, model: &Spanned<String>) -> Outcome {
        let _ = self.model_entry(model)?;
        Err(Diagnostic::new(model.span, "`check` is not available yet").label("not yet"))
    }
}
