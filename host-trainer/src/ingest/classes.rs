//! The classes a log's labels name: a list of named classes, each with the label tokens
//! that stand for it, one of which may be marked GO. A label cell maps to a class index
//! ([`ClassId`]) in this list; the ±1 GO-vs-rest view every trainer reads
//! ([`Dataset::labels`](super::dataset::Dataset::labels)) comes from the index by
//! [`Classes::sign`]. Today the list is GO and NO-GO ([`Classes::go_nogo`], from
//! `--go-labels` and `--nogo-labels`); more classes come by giving more token lists, and the
//! readers, which only ask [`Classes::label`] or [`Classes::class_of`], stay as they are.

/// A class's place in its [`Classes`] list.
pub type ClassId = u8;

/// The name of the class a GO token stands for.
pub const GO: &str = "GO";
/// The name of the class a NO-GO token stands for.
pub const NO_GO: &str = "NO-GO";

/// Default GO tokens. No number or boolean: whether `1` means a good unit or a defect
/// differs from export to export, so it must be stated (`--go-labels 1 --nogo-labels 0`).
pub const GO_TOKENS: &[&str] = &["go", "pass", "ok", "good"];
/// Default NO-GO tokens (words only, as [`GO_TOKENS`]).
pub const NOGO_TOKENS: &[&str] = &["nogo", "no-go", "no_go", "fail", "ng", "bad", "reject"];

/// One outcome a unit's label can name.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Class {
    /// The class's name, as messages and reports say it.
    pub name: String,
    /// The label tokens that stand for it, lower case, compared without regard to case.
    pub tokens: Vec<String>,
}

/// The classes of a log, in order; a label is an index into [`list`](Self::list).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Classes {
    /// The classes, in order.
    pub list: Vec<Class>,
    /// The class that is GO (`+1` in the GO-vs-rest view), if any.
    pub go: Option<ClassId>,
}

impl Default for Classes {
    /// GO and NO-GO with the default tokens.
    fn default() -> Self {
        let own = |t: &[&str]| t.iter().map(|s| s.to_string()).collect::<Vec<_>>();
        Self::go_nogo(&own(GO_TOKENS), &own(NOGO_TOKENS))
    }
}

impl Classes {
    /// GO (class 0, marked GO) and NO-GO (class 1) with these tokens.
    pub fn go_nogo(go: &[String], nogo: &[String]) -> Self {
        Self {
            list: vec![
                Class {
                    name: GO.into(),
                    tokens: go.to_vec(),
                },
                Class {
                    name: NO_GO.into(),
                    tokens: nogo.to_vec(),
                },
            ],
            go: Some(0),
        }
    }

    /// The class `token` stands for (the first class whose tokens hold it), or `None`.
    pub fn class_of(&self, token: &[u8]) -> Option<ClassId> {
        let k = self.list.iter().position(|c| token_in(token, &c.tokens))?;
        ClassId::try_from(k).ok()
    }

    /// Class `id` in the GO-vs-rest view the trainers read: +1 for the GO class, −1 for
    /// every other.
    pub fn sign(&self, id: ClassId) -> i8 {
        if Some(id) == self.go { 1 } else { -1 }
    }

    /// The label `token` stands for in the GO-vs-rest view ([`Self::sign`] of its class),
    /// or `None` for a token of no class.
    pub fn label(&self, token: &[u8]) -> Option<i8> {
        self.class_of(token).map(|c| self.sign(c))
    }

    /// The class a GO-vs-rest label stands for while there are two classes (+1 the GO
    /// class, −1 the other); `None` for 0 (no label) or when the view cannot tell.
    pub fn class_of_sign(&self, label: i8) -> Option<ClassId> {
        let go = self.go?;
        match label {
            1 => Some(go),
            -1 if self.list.len() == 2 => Some(1 - go),
            _ => None,
        }
    }

    /// The classes' names, in order.
    pub fn names(&self) -> impl Iterator<Item = &str> {
        self.list.iter().map(|c| c.name.as_str())
    }

    /// The accepted tokens, as error messages list them (`GO: go, pass; NO-GO: fail`).
    pub fn tokens(&self) -> String {
        self.list
            .iter()
            .map(|c| format!("{}: {}", c.name, c.tokens.join(", ")))
            .collect::<Vec<_>>()
            .join("; ")
    }
}

/// Whether `token` is one of `tokens` (lower case), compared case-insensitively. ASCII
/// tokens (the usual case) need no allocation.
fn token_in(token: &[u8], tokens: &[String]) -> bool {
    if token.is_ascii() {
        tokens
            .iter()
            .any(|t| t.as_bytes().eq_ignore_ascii_case(token))
    } else {
        let token = String::from_utf8_lossy(token).to_lowercase();
        tokens.contains(&token)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn own(t: &[&str]) -> Vec<String> {
        t.iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn go_and_nogo_tokens_map_to_their_class_and_to_plus_minus_one() {
        let c = Classes::go_nogo(
            &own(&["go", "pass", "ok"]),
            &own(&["nogo", "fail", "ärger"]),
        );
        assert_eq!(c.names().collect::<Vec<_>>(), ["GO", "NO-GO"]);
        assert_eq!(c.class_of(b"PASS"), Some(0));
        assert_eq!(c.class_of(b"Fail"), Some(1));
        assert_eq!(c.class_of("ÄRGER".as_bytes()), Some(1));
        assert_eq!(c.class_of(b"maybe"), None);
        assert_eq!(c.label(b"ok"), Some(1));
        assert_eq!(c.label(b"nogo"), Some(-1));
        assert_eq!(c.label(b""), None);
        assert_eq!(c.class_of_sign(1), Some(0));
        assert_eq!(c.class_of_sign(-1), Some(1));
        assert_eq!(c.class_of_sign(0), None);
        assert_eq!(c.tokens(), "GO: go, pass, ok; NO-GO: nogo, fail, ärger");
    }

    #[test]
    fn a_token_of_both_lists_is_go_as_before() {
        let c = Classes::go_nogo(&own(&["x"]), &own(&["x", "y"]));
        assert_eq!(c.label(b"x"), Some(1));
        assert_eq!(c.label(b"y"), Some(-1));
    }

    /// The seam a later issue uses: a third class is more tokens; every class but the GO
    /// one is −1 in the trainers' view, and the reader's calls are the same.
    #[test]
    fn more_classes_come_by_more_tokens() {
        let mut c = Classes::go_nogo(&own(&["go"]), &own(&["fail"]));
        c.list.push(Class {
            name: "RECHECK".into(),
            tokens: own(&["recheck"]),
        });
        assert_eq!(c.class_of(b"recheck"), Some(2));
        assert_eq!(c.label(b"recheck"), Some(-1));
        assert_eq!(
            c.class_of_sign(-1),
            None,
            "three classes: −1 does not tell which"
        );
        assert_eq!(c.tokens(), "GO: go; NO-GO: fail; RECHECK: recheck");
    }
}
