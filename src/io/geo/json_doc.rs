//! A JSON layer document read in one pass, with a Topology's arcs decoded
//! straight into numbers.
//!
//! The arcs hold nearly all of a TopoJSON file's bytes. Read as generic
//! JSON values, each position costs about a hundred bytes and an allocation;
//! read here, it costs sixteen bytes in one flat list. Every other member is
//! kept as a JSON value (objects, properties and transforms are small). A
//! position that is not a pair of numbers does not stop the parse: the first
//! one is remembered and reported by the TopoJSON reader, which knows how to
//! say where it is.

use std::fmt;

use serde::de::{DeserializeSeed, Deserializer, IgnoredAny, MapAccess, SeqAccess, Visitor};
use serde::Deserialize;
use serde_json::{Map, Value};

/// The document: every top-level member but `arcs` as JSON, and `arcs` (if
/// present) as numbers.
pub struct Doc {
    /// The other members (an empty object when the document is not an
    /// object).
    pub rest: Value,
    /// The `arcs` member.
    pub arcs: Option<Arcs>,
}

/// A Topology's arcs as written (before any transform).
#[derive(Default)]
pub struct Arcs {
    /// Positions of all arcs, one arc after another.
    pub points: Vec<[f64; 2]>,
    /// Where each arc starts in `points`; one more entry holds the end.
    pub starts: Vec<usize>,
    /// The first thing that is not as it should be.
    pub problem: Option<ArcProblem>,
}

/// What is wrong with the arcs.
#[derive(Debug, Clone, PartialEq)]
pub enum ArcProblem {
    /// `arcs` is not a list.
    NotAList,
    /// Arc (0-based) is not a list of positions.
    ArcNotAList(usize),
    /// Arc (0-based), position (1-based) is not a pair of numbers; what it is.
    NotAPair(usize, usize, String),
}

impl Arcs {
    /// Number of arcs.
    pub fn len(&self) -> usize {
        self.starts.len().saturating_sub(1)
    }

    /// True when there are no arcs.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The positions of arc `k`.
    pub fn arc(&self, k: usize) -> &[[f64; 2]] {
        &self.points[self.starts[k]..self.starts[k + 1]]
    }
}

/// Parses a JSON document (see the module notes).
pub fn parse(bytes: &[u8]) -> serde_json::Result<Doc> {
    let mut de = serde_json::Deserializer::from_slice(bytes);
    let doc = Doc::deserialize(&mut de)?;
    de.end()?;
    Ok(doc)
}

/// Visitor methods for the JSON kinds a visitor does not expect: each gives
/// `$fallback` (after skipping the contents of a list or an object).
macro_rules! other_kinds {
    ($fallback:expr) => {
        fn visit_bool<E: serde::de::Error>(self, _: bool) -> Result<Self::Value, E> {
            Ok($fallback(self, "true or false".to_string()))
        }
        fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<Self::Value, E> {
            Ok($fallback(self, v.to_string()))
        }
        fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<Self::Value, E> {
            Ok($fallback(self, v.to_string()))
        }
        fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<Self::Value, E> {
            Ok($fallback(self, v.to_string()))
        }
        fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<Self::Value, E> {
            Ok($fallback(self, format!("{:?}", short(v))))
        }
        fn visit_unit<E: serde::de::Error>(self) -> Result<Self::Value, E> {
            Ok($fallback(self, "null".to_string()))
        }
        fn visit_map<A: MapAccess<'de>>(self, mut m: A) -> Result<Self::Value, A::Error> {
            while m.next_entry::<IgnoredAny, IgnoredAny>()?.is_some() {}
            Ok($fallback(self, "an object".to_string()))
        }
    };
}

fn short(s: &str) -> String {
    if s.chars().count() > 40 {
        format!("{}...", s.chars().take(40).collect::<String>())
    } else {
        s.to_string()
    }
}

impl<'de> Deserialize<'de> for Doc {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Doc, D::Error> {
        d.deserialize_any(DocVisitor)
    }
}

struct DocVisitor;

fn no_members(_: DocVisitor, _: String) -> Doc {
    Doc {
        rest: Value::Object(Map::new()),
        arcs: None,
    }
}

impl<'de> Visitor<'de> for DocVisitor {
    type Value = Doc;

    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str("a JSON document")
    }

    fn visit_map<A: MapAccess<'de>>(self, mut m: A) -> Result<Doc, A::Error> {
        let mut rest = Map::new();
        let mut arcs = None;
        while let Some(k) = m.next_key::<String>()? {
            if k == "arcs" {
                arcs = Some(m.next_value_seed(ArcsSeed)?);
            } else {
                let v: Value = m.next_value()?;
                rest.insert(k, v);
            }
        }
        Ok(Doc {
            rest: Value::Object(rest),
            arcs,
        })
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut s: A) -> Result<Doc, A::Error> {
        while s.next_element::<IgnoredAny>()?.is_some() {}
        Ok(no_members(self, String::new()))
    }

    fn visit_bool<E: serde::de::Error>(self, _: bool) -> Result<Doc, E> {
        Ok(no_members(self, String::new()))
    }
    fn visit_i64<E: serde::de::Error>(self, _: i64) -> Result<Doc, E> {
        Ok(no_members(self, String::new()))
    }
    fn visit_u64<E: serde::de::Error>(self, _: u64) -> Result<Doc, E> {
        Ok(no_members(self, String::new()))
    }
    fn visit_f64<E: serde::de::Error>(self, _: f64) -> Result<Doc, E> {
        Ok(no_members(self, String::new()))
    }
    fn visit_str<E: serde::de::Error>(self, _: &str) -> Result<Doc, E> {
        Ok(no_members(self, String::new()))
    }
    fn visit_unit<E: serde::de::Error>(self) -> Result<Doc, E> {
        Ok(no_members(self, String::new()))
    }
}

struct ArcsSeed;

fn arcs_not_a_list(_: ArcsSeed, _: String) -> Arcs {
    Arcs {
        problem: Some(ArcProblem::NotAList),
        ..Arcs::default()
    }
}

impl<'de> DeserializeSeed<'de> for ArcsSeed {
    type Value = Arcs;
    fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<Arcs, D::Error> {
        d.deserialize_any(self)
    }
}

impl<'de> Visitor<'de> for ArcsSeed {
    type Value = Arcs;

    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str("a list of arcs")
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut s: A) -> Result<Arcs, A::Error> {
        let mut arcs = Arcs {
            starts: vec![0],
            ..Arcs::default()
        };
        loop {
            let index = arcs.len();
            let seed = ArcSeed {
                index,
                arcs: &mut arcs,
            };
            if s.next_element_seed(seed)?.is_none() {
                break;
            }
            arcs.starts.push(arcs.points.len());
        }
        arcs.points.shrink_to_fit();
        Ok(arcs)
    }

    other_kinds!(arcs_not_a_list);
}

/// One arc, appended to `arcs`.
struct ArcSeed<'a> {
    index: usize,
    arcs: &'a mut Arcs,
}

fn arc_not_a_list(seed: ArcSeed<'_>, _: String) {
    seed.arcs
        .problem
        .get_or_insert(ArcProblem::ArcNotAList(seed.index));
}

impl<'de> DeserializeSeed<'de> for ArcSeed<'_> {
    type Value = ();
    fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        d.deserialize_any(self)
    }
}

impl<'de> Visitor<'de> for ArcSeed<'_> {
    type Value = ();

    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str("an arc")
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut s: A) -> Result<(), A::Error> {
        let mut k = 0;
        while let Some(p) = s.next_element_seed(PositionSeed)? {
            k += 1;
            match p {
                Ok(xy) => self.arcs.points.push(xy),
                Err(what) => {
                    self.arcs
                        .problem
                        .get_or_insert(ArcProblem::NotAPair(self.index, k, what));
                }
            }
        }
        Ok(())
    }

    other_kinds!(arc_not_a_list);
}

/// One position: a pair of numbers (more numbers, as a TopoJSON position
/// may carry, are skipped), or a description of what it is instead.
struct PositionSeed;

type Position = Result<[f64; 2], String>;

fn position_not_a_list(_: PositionSeed, what: String) -> Position {
    Err(what)
}

impl<'de> DeserializeSeed<'de> for PositionSeed {
    type Value = Position;
    fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<Position, D::Error> {
        d.deserialize_any(self)
    }
}

impl<'de> Visitor<'de> for PositionSeed {
    type Value = Position;

    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str("a position")
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut s: A) -> Result<Position, A::Error> {
        let x = s.next_element::<Number>()?;
        let y = match x {
            Some(_) => s.next_element::<Number>()?,
            None => None,
        };
        while s.next_element::<IgnoredAny>()?.is_some() {}
        Ok(match (x, y) {
            (Some(Number(Some(x))), Some(Number(Some(y)))) => Ok([x, y]),
            (None, _) => Err("an empty list".to_string()),
            (_, None) => Err("a list with one item".to_string()),
            _ => Err("a list whose first two items are not both numbers".to_string()),
        })
    }

    other_kinds!(position_not_a_list);
}

/// A number, or `None` for anything else.
struct Number(Option<f64>);

impl<'de> Deserialize<'de> for Number {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Number, D::Error> {
        d.deserialize_any(NumberVisitor)
    }
}

struct NumberVisitor;

fn not_a_number(_: NumberVisitor, _: String) -> Number {
    Number(None)
}

impl<'de> Visitor<'de> for NumberVisitor {
    type Value = Number;

    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str("a number")
    }

    fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<Number, E> {
        Ok(Number(Some(v as f64)))
    }
    fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<Number, E> {
        Ok(Number(Some(v as f64)))
    }
    fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<Number, E> {
        Ok(Number(Some(v)))
    }
    fn visit_bool<E: serde::de::Error>(self, _: bool) -> Result<Number, E> {
        Ok(Number(None))
    }
    fn visit_str<E: serde::de::Error>(self, _: &str) -> Result<Number, E> {
        Ok(Number(None))
    }
    fn visit_unit<E: serde::de::Error>(self) -> Result<Number, E> {
        Ok(Number(None))
    }
    fn visit_seq<A: SeqAccess<'de>>(self, mut s: A) -> Result<Number, A::Error> {
        while s.next_element::<IgnoredAny>()?.is_some() {}
        Ok(not_a_number(self, String::new()))
    }
    fn visit_map<A: MapAccess<'de>>(self, mut m: A) -> Result<Number, A::Error> {
        while m.next_entry::<IgnoredAny, IgnoredAny>()?.is_some() {}
        Ok(Number(None))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn arcs_are_read_as_numbers_and_the_rest_as_json() {
        let doc = parse(
            br#"{"type":"Topology","arcs":[[[0,0],[1,2,7]],[[3.5,-4]]],"objects":{"a":{"type":"Polygon"}}}"#,
        )
        .unwrap();
        let arcs = doc.arcs.unwrap();
        assert_eq!(arcs.len(), 2);
        assert_eq!(arcs.arc(0), &[[0.0, 0.0], [1.0, 2.0]]);
        assert_eq!(arcs.arc(1), &[[3.5, -4.0]]);
        assert_eq!(arcs.problem, None);
        assert_eq!(doc.rest["type"], "Topology");
        assert!(doc.rest["objects"]["a"].is_object());
        assert!(doc.rest.get("arcs").is_none());
    }

    #[test]
    fn the_first_bad_position_is_remembered_and_the_parse_goes_on() {
        let doc = parse(br#"{"arcs":[[[0,0]],[[1,1],["a",2],[3]],7],"type":"Topology"}"#).unwrap();
        let arcs = doc.arcs.unwrap();
        assert_eq!(arcs.len(), 3);
        assert_eq!(
            arcs.problem,
            Some(ArcProblem::NotAPair(
                1,
                2,
                "a list whose first two items are not both numbers".into()
            ))
        );
        assert_eq!(doc.rest["type"], "Topology");
        let doc = parse(br#"{"arcs":{"x":1}}"#).unwrap();
        assert_eq!(doc.arcs.unwrap().problem, Some(ArcProblem::NotAList));
        let doc = parse(br#"{"arcs":[[[0,0]],null]}"#).unwrap();
        assert_eq!(doc.arcs.unwrap().problem, Some(ArcProblem::ArcNotAList(1)));
    }

    #[test]
    fn a_document_that_is_not_an_object_has_no_members_and_bad_json_is_an_error() {
        assert!(parse(b"[1,2]")
            .unwrap()
            .rest
            .as_object()
            .unwrap()
            .is_empty());
        assert!(parse(b"\"x\"").unwrap().arcs.is_none());
        assert!(parse(br#"{"arcs":[[[0,0]]"#).is_err());
        assert!(parse(br#"{"a":1} x"#).is_err());
    }
}
