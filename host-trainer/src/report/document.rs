//! The audit report as typed sections: each section's Markdown with the part of the report
//! it is. `markdown.rs` builds it, the Markdown report is its sections in order, and
//! `html.rs` renders each section and places a chart by the part, never by heading text.

/// A part of the audit report, one per `##` section (the title before them).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Part {
    /// The report's title line.
    Title,
    /// The verdict and the units behind failed gates.
    Verdict,
    /// Model, logs, blob and choices.
    Provenance,
    /// The model's operating point.
    OperatingPoint,
    /// How cross-validation chose C.
    CChoice,
    /// Decisions per log, rates and every gate.
    Decisions,
    /// Margin and the rounding bound.
    Margins,
    /// The channels' weights and margins.
    Channels,
    /// Signal features' proofs.
    SignalFeatures,
    /// Sensor tolerance.
    Tolerance,
    /// Units at risk from sensor noise.
    UnitsAtRisk,
    /// Units closest to the boundary.
    Tightest,
    /// The word-length sweep.
    Sweep,
    /// The method and its inputs.
    Method,
    /// Every setting and its source.
    Settings,
}

/// One section: the part it is and its Markdown (from its heading to the next one's).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Section {
    /// Which part of the report.
    pub part: Part,
    /// Its Markdown.
    pub text: String,
}

/// The report as its sections in order.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Document {
    /// The sections, title first.
    pub sections: Vec<Section>,
}

impl Document {
    /// Ends the section written so far into `text` (taken) and starts `part`.
    pub(super) fn open(&mut self, part: Part, text: &mut String) {
        self.close(text);
        self.sections.push(Section {
            part,
            text: String::new(),
        });
    }

    /// Ends the last section with what was written into `text` (taken).
    pub(super) fn close(&mut self, text: &mut String) {
        if let Some(last) = self.sections.last_mut() {
            last.text.push_str(&std::mem::take(text));
        }
    }

    /// The Markdown report: every section's text in order.
    pub fn markdown(&self) -> String {
        self.sections.iter().map(|s| s.text.as_str()).collect()
    }

    /// The section of `part`, if the report has one.
    pub fn section(&self, part: Part) -> Option<&Section> {
        self.sections.iter().find(|s| s.part == part)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sections_take_what_was_written_until_the_next_one_opens() {
        let mut d = Document::default();
        let mut s = String::new();
        d.open(Part::Title, &mut s);
        s.push_str("# T\n");
        d.open(Part::Verdict, &mut s);
        s.push_str("\n## Verdict\n");
        d.open(Part::Margins, &mut s);
        s.push_str("\n## Margin\nx\n");
        d.close(&mut s);
        assert_eq!(d.markdown(), "# T\n\n## Verdict\n\n## Margin\nx\n");
        assert_eq!(d.section(Part::Margins).unwrap().text, "\n## Margin\nx\n");
        assert!(d.section(Part::Sweep).is_none());
    }
}
