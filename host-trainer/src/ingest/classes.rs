//! The classes a log's labels name: a list of named classes, each with the label tokens
//! that stand for it, one of which may be marked GO. A label cell maps to a class
//! ([`Classes::class_of`]) and each unit keeps its class as a code
//! ([`Classes::code`], kept in [`Dataset::labels`](super::dataset::Dataset::labels)): +1
//! the GO class, −1 the first other class, −2 the next… With GO and NO-GO, the only list
//! today ([`Classes::go_nogo`], from `--go-labels` and `--nogo-labels`), the codes are
//! exactly the ±1 GO-vs-rest view every trainer reads. More classes come by giving more
//! token lists: the readers, which only ask [`Classes::label`], and the per-unit storage
//! stay as they are, and [`Classes::class_of_code`] gives each unit's class back.

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
#[derive(Clone, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
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
    /// Whether the list was declared (`--class`): then any number of classes up to
    /// [`MAX_CLASSES`] reaches the steps that decide between classes. `false` for GO and
    /// NO-GO from `--go-labels`/`--nogo-labels`, which every step reads as ±1.
    pub declared: bool,
}

/// Most classes a model holds (the device's limit).
pub const MAX_CLASSES: usize = shared_model::limits::MAX_CLASSES;

/// Longest class name, in bytes (the device keeps 24).
pub const MAX_CLASS_NAME: usize = 24;

/// Which declared class is GO (`--go-class`).
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum GoClass {
    /// The class named GO (case-insensitively); refused when no class has that name.
    Default,
    /// No class is GO: pure diagnosis.
    None,
    /// The class of this name (case-insensitively).
    Named(String),
}

impl GoClass {
    /// `--go-class`'s value: `none`, or a class name.
    pub fn parse(s: &str) -> Self {
        if s.trim().eq_ignore_ascii_case("none") {
            Self::None
        } else {
            Self::Named(s.trim().to_string())
        }
    }
}

/// One `--class NAME=TOKEN[,TOKEN…]` value: the name and its tokens, lower case.
///
/// # Errors
/// No `=`, an empty name or token, a name beyond [`MAX_CLASS_NAME`] bytes, a name that is
/// not one word of printable ASCII without `#`, or the name RECHECK or FAULT.
pub fn parse_class(s: &str) -> Result<Class, String> {
    let Some((name, tokens)) = s.split_once('=') else {
        return Err(format!(
            "'{s}' is not a class: give NAME=TOKEN[,TOKEN…], e.g. SHORT=short,winding"
        ));
    };
    let name = name.trim();
    if name.is_empty() || name.len() > MAX_CLASS_NAME {
        return Err(format!(
            "'{s}': a class name is 1 to {MAX_CLASS_NAME} bytes (the device keeps that many); '{name}' is {}",
            name.len()
        ));
    }
    // The device prints the name as the last word of its line: one word of printable
    // ASCII, no `#` (where a line's comment starts), and not a word a line already uses.
    if !name.bytes().all(|b| b.is_ascii_graphic() && b != b'#') {
        return Err(format!(
            "'{s}': a class name is one word of printable ASCII without '#' (the device prints it at the end of its line), e.g. SHORT or bearing_2"
        ));
    }
    if ["RECHECK", "FAULT"]
        .iter()
        .any(|w| name.eq_ignore_ascii_case(w))
    {
        return Err(format!(
            "'{s}': {name} is a word the device's lines use for an outcome; name the class otherwise"
        ));
    }
    let tokens: Vec<String> = tokens.split(',').map(|t| t.trim().to_lowercase()).collect();
    if tokens.iter().any(String::is_empty) {
        return Err(format!(
            "'{s}': a class's label tokens are comma-separated and none is empty"
        ));
    }
    Ok(Class {
        name: name.to_string(),
        tokens,
    })
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
            declared: false,
        }
    }

    /// Declared classes (`--class`, in the order given) with `go` marking the GO class.
    ///
    /// # Errors
    /// Fewer than two or more than [`MAX_CLASSES`] classes, a name twice (case-insensitively),
    /// a token of two classes, or a GO class that is not among them (the message names the
    /// classes and the flag).
    pub fn declared(list: Vec<Class>, go: &GoClass) -> Result<Self, String> {
        if list.len() < 2 || list.len() > MAX_CLASSES {
            return Err(format!(
                "--class is given {} times: a model of classes has 2 to {MAX_CLASSES} (the device's limit)",
                list.len()
            ));
        }
        for (k, a) in list.iter().enumerate() {
            for b in &list[k + 1..] {
                if a.name.eq_ignore_ascii_case(&b.name) {
                    return Err(format!(
                        "--class names the class '{}' twice ('{}' and '{}'); each class needs a name of its own",
                        a.name, a.name, b.name
                    ));
                }
                if let Some(t) = a.tokens.iter().find(|t| b.tokens.contains(t)) {
                    return Err(format!(
                        "--class: the label token '{t}' stands for both '{}' and '{}'; give it to one class",
                        a.name, b.name
                    ));
                }
            }
        }
        let find = |name: &str| {
            list.iter()
                .position(|c| c.name.eq_ignore_ascii_case(name))
                .and_then(|k| ClassId::try_from(k).ok())
        };
        let names = list
            .iter()
            .map(|c| c.name.as_str())
            .collect::<Vec<_>>()
            .join(", ");
        let go = match go {
            GoClass::None => None,
            GoClass::Default => Some(find(GO).ok_or_else(|| {
                format!(
                    "no class is named GO (the classes are {names}): name the class of good units with --go-class NAME, or give --go-class none for diagnosis without a GO class"
                )
            })?),
            GoClass::Named(n) => Some(find(n).ok_or_else(|| {
                format!("--go-class {n}: no class has that name (the classes are {names}); give one of them, or none")
            })?),
        };
        Ok(Self {
            list,
            go,
            declared: true,
        })
    }

    /// The GO class's name, or `none`, as `--go-class` takes it.
    pub fn go_name(&self) -> String {
        self.go
            .and_then(|g| self.list.get(usize::from(g)))
            .map_or_else(|| "none".to_string(), |c| c.name.clone())
    }

    /// The class `token` stands for (the first class whose tokens hold it), or `None`.
    #[inline]
    pub fn class_of(&self, token: &[u8]) -> Option<ClassId> {
        let k = self.list.iter().position(|c| token_in(token, &c.tokens))?;
        ClassId::try_from(k).ok()
    }

    /// Class `id` in the GO-vs-rest view the trainers read: +1 for the GO class, −1 for
    /// every other.
    #[inline]
    pub fn sign(&self, id: ClassId) -> i8 {
        if Some(id) == self.go { 1 } else { -1 }
    }

    /// The code a unit of class `id` keeps: +1 for the GO class, −1 − k for the k-th
    /// other class (in list order). Its sign is [`Self::sign`]; with two classes it is the
    /// sign itself.
    #[inline]
    pub fn code(&self, id: ClassId) -> i8 {
        if Some(id) == self.go {
            return 1;
        }
        let before = (0..id).filter(|&k| Some(k) != self.go).count();
        // ClassId is a u8 and a list holds at most 127 classes besides GO (`label` refuses
        // a class past that), so the rank fits.
        -1 - i8::try_from(before).unwrap_or(i8::MAX - 1)
    }

    /// The code of the class `token` stands for ([`Self::code`]), or `None` for a token of
    /// no class (or of a class past the 128th, which no code can hold).
    #[inline]
    pub fn label(&self, token: &[u8]) -> Option<i8> {
        let id = self.class_of(token)?;
        (id < 128).then(|| self.code(id))
    }

    /// The class a unit's code stands for; `None` for 0 (no label) or a code of no class.
    pub fn class_of_code(&self, code: i8) -> Option<ClassId> {
        (0..self.list.len())
            .filter_map(|k| ClassId::try_from(k).ok())
            .find(|&id| code != 0 && self.code(id) == code)
    }

    /// The classes' names, in order.
    pub fn names(&self) -> impl Iterator<Item = &str> {
        self.list.iter().map(|c| c.name.as_str())
    }

    /// How a user maps another label token: the flags of this kind of class list.
    pub fn how_to_map(&self) -> &'static str {
        if self.declared {
            "give each class its tokens: --class NAME=TOKEN,TOKEN"
        } else {
            "set --go-labels / --nogo-labels"
        }
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
#[inline]
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
        assert_eq!(c.class_of_code(1), Some(0));
        assert_eq!(c.class_of_code(-1), Some(1));
        assert_eq!(c.class_of_code(0), None);
        assert_eq!(c.tokens(), "GO: go, pass, ok; NO-GO: nogo, fail, ärger");
    }

    #[test]
    fn a_token_of_both_lists_is_go_as_before() {
        let c = Classes::go_nogo(&own(&["x"]), &own(&["x", "y"]));
        assert_eq!(c.label(b"x"), Some(1));
        assert_eq!(c.label(b"y"), Some(-1));
    }

    /// The seam a later issue uses: a third class is more tokens; its units keep a code of
    /// their own (−2), negative as every class but GO, so the trainers' GO-vs-rest view is
    /// its sign, and the reader's calls are the same.
    #[test]
    fn more_classes_come_by_more_tokens() {
        let mut c = Classes::go_nogo(&own(&["go"]), &own(&["fail"]));
        c.list.push(Class {
            name: "BEARING".into(),
            tokens: own(&["bearing"]),
        });
        assert_eq!(c.class_of(b"bearing"), Some(2));
        assert_eq!(c.label(b"bearing"), Some(-2));
        assert_eq!(c.label(b"fail"), Some(-1));
        assert_eq!(c.class_of_code(-2), Some(2));
        assert_eq!(c.class_of_code(-1), Some(1));
        assert_eq!(c.class_of_code(-3), None);
        assert_eq!(c.tokens(), "GO: go; NO-GO: fail; BEARING: bearing");
    }

    /// Pure diagnosis: no class is GO, and every class keeps a code of its own.
    #[test]
    fn without_a_go_class_every_class_has_its_own_negative_code() {
        let mut c = Classes::go_nogo(&own(&["short"]), &own(&["crack"]));
        c.go = None;
        assert_eq!(c.label(b"short"), Some(-1));
        assert_eq!(c.label(b"crack"), Some(-2));
        assert_eq!(c.class_of_code(-2), Some(1));
    }
}
