//! Where each key of a YAML document stands: a map from key path (`detectors[3].aperture`)
//! to its line and column, so that every config problem can point at the text.

use std::collections::HashMap;

use yaml_rust2::parser::{Event, MarkedEventReceiver, Parser};
use yaml_rust2::scanner::Marker;

/// Line and column (both 1-based) of each key path in a YAML text.
#[derive(Debug, Default, Clone)]
pub struct Locations {
    places: HashMap<String, (usize, usize)>,
}

enum Frame {
    /// A mapping: its path, the key whose value comes next, and where it started (used for
    /// the mapping's own place only when it has no key; otherwise its first key is its place,
    /// which is where a reader looks).
    Map {
        path: String,
        key: Option<String>,
        start: (usize, usize),
    },
    Seq {
        path: String,
        next: usize,
    },
}

#[derive(Default)]
struct Walker {
    stack: Vec<Frame>,
    places: HashMap<String, (usize, usize)>,
}

impl Walker {
    /// The path of the node that starts now, or `None` when the node is a mapping key.
    fn node_path(&mut self) -> Option<String> {
        match self.stack.last_mut() {
            None => Some(String::new()),
            Some(Frame::Seq { path, next }) => {
                let p = format!("{path}[{next}]");
                *next += 1;
                Some(p)
            }
            Some(Frame::Map { path, key, .. }) => key.take().map(|k| stages::problem_key(path, &k)),
        }
    }
}

impl MarkedEventReceiver for Walker {
    fn on_event(&mut self, ev: Event, mark: Marker) {
        let here = (mark.line(), mark.col() + 1);
        match ev {
            Event::Scalar(value, ..) => match self.node_path() {
                Some(path) => {
                    self.places.entry(path).or_insert(here);
                }
                None => {
                    if let Some(Frame::Map { path, key, .. }) = self.stack.last_mut() {
                        self.places.entry(path.clone()).or_insert(here);
                        self.places.insert(stages::problem_key(path, &value), here);
                        *key = Some(value);
                    }
                }
            },
            Event::MappingStart(..) => {
                let path = self.node_path().unwrap_or_default();
                self.stack.push(Frame::Map { path, key: None, start: here });
            }
            Event::SequenceStart(..) => {
                let path = self.node_path().unwrap_or_default();
                self.places.entry(path.clone()).or_insert(here);
                self.stack.push(Frame::Seq { path, next: 0 });
            }
            Event::MappingEnd | Event::SequenceEnd => {
                if let Some(Frame::Map { path, start, .. }) = self.stack.pop() {
                    self.places.entry(path).or_insert(start);
                }
            }
            Event::Alias(_) => {
                self.node_path();
            }
            _ => {}
        }
    }
}

impl Locations {
    /// Locate every key of `text`; a text that does not parse gives an empty map (the YAML
    /// deserializer reports the syntax error with its own position).
    pub fn of(text: &str) -> Self {
        let mut walker = Walker::default();
        let mut parser = Parser::new_from_str(text);
        match parser.load(&mut walker, false) {
            Ok(()) => Locations { places: walker.places },
            Err(_) => Locations::default(),
        }
    }

    /// Line and column of `key`, or of its nearest ancestor that is written.
    pub fn find(&self, key: &str) -> Option<(usize, usize)> {
        let mut k = key;
        loop {
            if let Some(p) = self.places.get(k) {
                return Some(*p);
            }
            let cut = k.rfind(['.', '['])?;
            k = &k[..cut];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keys_and_items_are_located() {
        let text = "a: 1\nlist:\n  - id: x\n    deep: { r: 2 }\n  - id: y\n";
        let loc = Locations::of(text);
        assert_eq!(loc.find("a"), Some((1, 1)));
        assert_eq!(loc.find("list[0].id"), Some((3, 5)));
        assert_eq!(loc.find("list[0].deep.r"), Some((4, 13)));
        assert_eq!(loc.find("list[1].id"), Some((5, 5)));
        assert_eq!(loc.find("list[1].missing"), Some((5, 5)));
    }
}
