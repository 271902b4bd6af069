//! Handlers of `plot` and `unit`.

use super::{Outcome, Session};
use crate::diagnostic::Diagnostic;
use crate::lang::{PlotKind, Spanned};
use crate::report::markdown::code;
use crate::report::Item;

impl Session<'_> {
    pub(super) fn plot(
        &mut self,
        kind: PlotKind,
        model: &Spanned<String>,
        covariate: Option<&Spanned<String>>,
        factor: Option<&Spanned<String>>,
    ) -> Outcome {
        let _ = (kind, covariate, factor);
        let _ = self.model_entry(model)?;
        Err(Diagnostic::new(model.span, "`plot` is not available yet").label("not yet"))
    }

    pub(super) fn unit(&mut self, column: &Spanned<String>, unit: &Spanned<String>) -> Outcome {
        let set = self.current(column.span)?;
        super::data_statements::column_index(set, column)?;
        match self.units.iter_mut().find(|(c, _)| *c == column.value) {
            Some(slot) => slot.1 = unit.value.clone(),
            None => self.units.push((column.value.clone(), unit.value.clone())),
        }
        Ok(vec![Item::Text(format!(
            "Figures label {} in {}.",
            code(&column.value),
            code(&unit.value)
        ))])
    }
}
