//! The `params` section: named values and expressions (`cable_c: 2.5 m * 100 pF/m`), read
//! in dependency order, with unknown names, cycles and unused params reported.

use super::*;

impl Reader<'_> {
    pub(super) fn read_params(&mut self, node: &Node) {
        let NodeKind::Map(entries) = &node.kind else {
            self.push(
                Diagnostic::error("wrong_type", "`params` must be a mapping of name: value")
                    .at(node.span, format!("found {}", node.shape()))
                    .help("write `cable_length: 2.5 m` lines under `params:`"),
            );
            return;
        };
        let mut texts: BTreeMap<String, (&Key, &Node)> = BTreeMap::new();
        for (key, value) in entries {
            if let Some((first, _)) = texts.get(&key.name) {
                let first = first.span;
                self.push(
                    Diagnostic::error(
                        "duplicate_key",
                        format!("param `{}` is defined twice", key.name),
                    )
                    .at(key.span, "defined again here")
                    .also(first, "first defined here")
                    .help("keep one definition"),
                );
                continue;
            }
            let valid = key.name.chars().next().is_some_and(|c| c.is_ascii_alphabetic())
                && key.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
            if !valid {
                self.push(
                    Diagnostic::error("param_name", format!("`{}` can't name a param", key.name))
                        .at(key.span, "letters, digits and '_', starting with a letter")
                        .help("for example `cable_length`"),
                );
                continue;
            }
            if quantity::reads_as_unit(&key.name) {
                self.push(
                    Diagnostic::error(
                        "param_name",
                        format!("param name `{}` reads as a unit or prefix", key.name),
                    )
                    .at(key.span, "ambiguous in an expression")
                    .help(format!(
                        "choose a longer name, e.g. `{}_value`",
                        key.name.to_lowercase()
                    )),
                );
                continue;
            }
            texts.insert(key.name.clone(), (key, value));
        }
        // Evaluate in dependency order; report cycles once.
        let mut state: BTreeMap<String, u8> = BTreeMap::new(); // 1 visiting, 2 done
        let order: Vec<String> = entries.iter().map(|(k, _)| k.name.clone()).collect();
        let mut failed: BTreeSet<String> = BTreeSet::new();
        for name in order {
            let mut stack = Vec::new();
            self.visit_param(&name, &texts, &mut state, &mut failed, &mut stack);
        }
        self.failed_names.extend(failed);
    }

    pub(super) fn visit_param(
        &mut self,
        name: &str,
        texts: &BTreeMap<String, (&Key, &Node)>,
        state: &mut BTreeMap<String, u8>,
        failed: &mut BTreeSet<String>,
        stack: &mut Vec<String>,
    ) {
        let Some(&(key, node)) = texts.get(name) else { return };
        match state.get(name) {
            Some(2) => return,
            Some(1) => {
                let start = stack.iter().position(|s| s == name).unwrap_or(0);
                let mut cycle: Vec<String> = stack[start..].to_vec();
                cycle.push(name.to_string());
                self.push(
                    Diagnostic::error(
                        "param_cycle",
                        format!("params depend on each other in a loop: {}", cycle.join(" → ")),
                    )
                    .at(key.span, "part of the loop")
                    .help("give one of them a value that does not use the others"),
                );
                for c in &cycle {
                    failed.insert(c.clone());
                    state.insert(c.clone(), 2);
                }
                return;
            }
            _ => {}
        }
        state.insert(name.to_string(), 1);
        stack.push(name.to_string());
        let text = node.scalar().map(str::to_string);
        if let Some(text) = &text {
            for (dep, _) in quantity::referenced_names(text) {
                if texts.contains_key(&dep) {
                    self.params_used.insert(dep.clone());
                    self.visit_param(&dep, texts, state, failed, stack);
                }
            }
        }
        stack.pop();
        if state.get(name) == Some(&2) {
            return; // closed by a cycle report
        }
        state.insert(name.to_string(), 2);
        let Some(text) = text else {
            self.push(
                Diagnostic::error("wrong_type", format!("param `{name}` must be a single value"))
                    .at(node.span, format!("found {}", node.shape()))
                    .help("write `name: 2.5 m` or `name: other * 2`"),
            );
            failed.insert(name.to_string());
            return;
        };
        let deps = quantity::referenced_names(&text);
        if deps.iter().any(|(d, _)| failed.contains(d)) {
            failed.insert(name.to_string());
            return; // the failing dependency was reported already
        }
        match quantity::evaluate(&text, &self.params) {
            Ok(mut v) => {
                if let Some(&si) = self.overrides.get(name) {
                    v.si = si;
                }
                self.params.insert(name.to_string(), v);
                self.places.insert(format!("params.{name}"), key.span);
            }
            Err(e) => {
                self.quantity_error(node, &text, e);
                failed.insert(name.to_string());
            }
        }
    }

    pub(super) fn param_list(&self, root: &Node) -> Vec<Param> {
        let mut out = Vec::new();
        let Some(node) = map_get(root, "params") else { return out };
        let NodeKind::Map(entries) = &node.kind else { return out };
        for (key, value) in entries {
            if let (Some(v), Some(text)) = (self.params.get(&key.name), value.scalar()) {
                if out.iter().any(|p: &Param| p.name == key.name) {
                    continue;
                }
                out.push(Param {
                    name: key.name.clone(),
                    value: v.si,
                    unit: v.dim.map(unit_symbol).unwrap_or_default(),
                    written: text.to_string(),
                });
            }
        }
        out
    }

    pub(super) fn unused_params(&mut self, root: &Node) {
        let Some(node) = map_get(root, "params") else { return };
        let NodeKind::Map(entries) = &node.kind else { return };
        for (key, _) in entries {
            if self.params.contains_key(&key.name) && !self.params_used.contains(&key.name) {
                self.push(
                    Diagnostic::warning(
                        "unused_param",
                        format!("param `{}` is not used", key.name),
                    )
                    .at(key.span, "defined but never used")
                    .help("use it in a value or remove it"),
                );
            }
        }
    }
}
