//! The function catalog: every script function, method and property with its doc.
//!
//! Registration goes through [`Registrar`], which registers the Rust closure with the
//! rhai engine and records the doc in the same call, so a function cannot reach scripts
//! without its summary, parameters (with units), an example and a source. Completion,
//! hints, `help`, the kernel's inspection and `docs/reference.md` all read this catalog.

use std::collections::BTreeMap;

use rhai::{Engine, RhaiNativeFunc, Variant};

/// What kind of name an entry is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Kind {
    /// A free function, `name(...)`.
    Function,
    /// A method, `value.name(...)`.
    Method,
    /// A property, `value.name`.
    Property,
    /// A unit suffix on numbers, `64.mm`.
    Unit,
}

/// One documented name.
#[derive(Debug, Clone)]
pub struct Entry {
    /// The name as typed.
    pub name: String,
    /// Receiver type for methods and properties (`Probe`, `Table`, ...).
    pub receiver: Option<String>,
    /// Function, method, property or unit.
    pub kind: Kind,
    /// Section of the reference ("Quantities", "Fluids", ...).
    pub group: String,
    /// Call form(s), one per line, with parameter types.
    pub signature: String,
    /// One or two sentences.
    pub summary: String,
    /// Parameters: (name, meaning with units).
    pub params: Vec<(String, String)>,
    /// What comes back.
    pub returns: String,
    /// A script that runs on its own and shows the use.
    pub example: String,
    /// Where the formula, data or convention comes from.
    pub source: String,
}

impl Entry {
    /// The name as shown in lists: `Probe.velocity` or `water`.
    pub fn qualified(&self) -> String {
        match &self.receiver {
            Some(r) => format!("{r}.{}", self.name),
            None => self.name.clone(),
        }
    }

    /// The help text: signature, summary, parameters, returns, example, source.
    pub fn help(&self) -> String {
        let mut s = format!("{}\n\n{}\n", self.signature, self.summary);
        if !self.params.is_empty() {
            s.push_str("\nParameters:\n");
            for (n, d) in &self.params {
                s.push_str(&format!("  {n}: {d}\n"));
            }
        }
        if !self.returns.is_empty() {
            s.push_str(&format!("\nReturns: {}\n", self.returns));
        }
        s.push_str(&format!("\nExample:\n{}\n", indent(&self.example)));
        s.push_str(&format!("\nSource: {}\n", self.source));
        s
    }
}

fn indent(s: &str) -> String {
    s.lines().map(|l| format!("    {l}")).collect::<Vec<_>>().join("\n")
}

/// Doc of one name, built fluently beside its registration.
#[derive(Debug, Clone)]
pub struct Doc(Entry);

impl Doc {
    /// Starts a doc: `signature` is the call form, e.g. `water() -> Fluid`.
    pub fn new(signature: &str, summary: &str) -> Self {
        Doc(Entry {
            name: String::new(),
            receiver: None,
            kind: Kind::Function,
            group: String::new(),
            signature: signature.to_string(),
            summary: summary.to_string(),
            params: Vec::new(),
            returns: String::new(),
            example: String::new(),
            source: String::new(),
        })
    }
    /// A parameter and its meaning (with units).
    pub fn param(mut self, name: &str, meaning: &str) -> Self {
        self.0.params.push((name.to_string(), meaning.to_string()));
        self
    }
    /// What comes back.
    pub fn returns(mut self, r: &str) -> Self {
        self.0.returns = r.to_string();
        self
    }
    /// A runnable example.
    pub fn example(mut self, e: &str) -> Self {
        self.0.example = e.trim().to_string();
        self
    }
    /// The source.
    pub fn source(mut self, s: &str) -> Self {
        self.0.source = s.to_string();
        self
    }
}

/// All documented names.
#[derive(Debug, Clone, Default)]
pub struct Catalog {
    entries: BTreeMap<String, Entry>,
}

impl Catalog {
    /// Adds or extends an entry (a second registration of the same name adds its
    /// signature line, for overloads documented once).
    pub fn add(&mut self, e: Entry) {
        let key = e.qualified();
        match self.entries.get_mut(&key) {
            Some(old) if old.signature != e.signature && !old.signature.contains(&e.signature) => {
                old.signature = format!("{}\n{}", old.signature, e.signature);
            }
            Some(_) => {}
            None => {
                self.entries.insert(key, e);
            }
        }
    }
    /// Every entry, ordered by qualified name.
    pub fn entries(&self) -> impl Iterator<Item = &Entry> {
        self.entries.values()
    }
    /// The entries for a name: `Probe.velocity`, `velocity` (every receiver), `water`.
    pub fn lookup(&self, name: &str) -> Vec<&Entry> {
        if let Some(e) = self.entries.get(name) {
            return vec![e];
        }
        let bare = name.rsplit('.').next().unwrap_or(name);
        self.entries.values().filter(|e| e.name == bare).collect()
    }
    /// Methods and properties of a receiver type.
    pub fn members_of<'a>(&'a self, receiver: &'a str) -> impl Iterator<Item = &'a Entry> + 'a {
        self.entries.values().filter(move |e| e.receiver.as_deref() == Some(receiver))
    }
    /// Names close to `name` (for "did you mean"), best first.
    pub fn similar(&self, name: &str) -> Vec<String> {
        let mut scored: Vec<(usize, String)> = self
            .entries
            .values()
            .map(|e| (edit_distance(&e.name.to_lowercase(), &name.to_lowercase()), e.qualified()))
            .filter(|(d, _)| *d <= 2.max(name.len() / 3))
            .collect();
        scored.sort();
        scored.dedup_by(|a, b| a.1 == b.1);
        scored.into_iter().take(3).map(|(_, n)| n).collect()
    }
}

pub use stagna::units::unit::edit_distance;

/// Registers functions with the engine and their docs with the catalog in one call.
pub struct Registrar<'a> {
    /// The engine.
    pub engine: &'a mut Engine,
    /// The catalog.
    pub catalog: &'a mut Catalog,
    group: String,
}

impl<'a> Registrar<'a> {
    /// A registrar over an engine and a catalog.
    pub fn new(engine: &'a mut Engine, catalog: &'a mut Catalog) -> Self {
        Self { engine, catalog, group: String::new() }
    }

    /// Sets the reference section for the following registrations.
    pub fn group(&mut self, g: &str) -> &mut Self {
        self.group = g.to_string();
        self
    }

    fn record(&mut self, name: &str, receiver: Option<&str>, kind: Kind, doc: &Doc) {
        let mut e = doc.0.clone();
        e.name = name.to_string();
        e.receiver = receiver.map(str::to_string);
        e.kind = kind;
        e.group = self.group.clone();
        self.catalog.add(e);
    }

    /// A free function.
    pub fn func<A: 'static, const N: usize, const X: bool, R: Variant + Clone, const F: bool, FN>(
        &mut self,
        name: &str,
        doc: &Doc,
        f: FN,
    ) -> &mut Self
    where
        FN: RhaiNativeFunc<A, N, X, R, F> + Send + Sync + 'static,
    {
        self.engine.register_fn(name, f);
        self.record(name, None, Kind::Function, doc);
        self
    }

    /// A method of `receiver` (the closure's first parameter is the receiver).
    pub fn method<A: 'static, const N: usize, const X: bool, R: Variant + Clone, const F: bool, FN>(
        &mut self,
        receiver: &str,
        name: &str,
        doc: &Doc,
        f: FN,
    ) -> &mut Self
    where
        FN: RhaiNativeFunc<A, N, X, R, F> + Send + Sync + 'static,
    {
        self.engine.register_fn(name, f);
        self.record(name, Some(receiver), Kind::Method, doc);
        self
    }

    /// A read-only property of `T`, shown as `receiver.name`.
    pub fn property<T: Variant + Clone, V: Variant + Clone>(
        &mut self,
        receiver: &str,
        name: &str,
        doc: &Doc,
        get: impl Fn(&mut T) -> V + Send + Sync + 'static,
    ) -> &mut Self {
        self.engine.register_get(name, get);
        self.record(name, Some(receiver), Kind::Property, doc);
        self
    }

    /// Documents a function registered elsewhere (one that needs the finished catalog).
    pub fn document(&mut self, name: &str, doc: &Doc) {
        self.record(name, None, Kind::Function, doc);
    }

    /// A unit suffix (`64.mm`): documented once per unit.
    pub fn unit(&mut self, name: &str, doc: &Doc) {
        self.record(name, None, Kind::Unit, doc);
    }
}
