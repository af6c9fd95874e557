//! Re-checking a certificate against the spec: every goal derived again, every tree walked
//! from the root, every leaf re-evaluated, every counterexample re-confirmed.

use super::*;

/// What a successful re-check covered.
#[derive(Clone, Debug, PartialEq)]
pub struct Rechecked {
    /// The verdict the certificate states (and the re-check confirmed).
    pub verdict: Verdict,
    /// Goals re-checked.
    pub goals: usize,
    /// Leaf boxes re-evaluated.
    pub leaves: usize,
    /// Counterexamples re-confirmed.
    pub counterexamples: usize,
    /// Each actuator's command against its limits as re-checked: `saturation-free` (its
    /// proof re-evaluated), `saturates` (its point re-confirmed), `undecided`, `not checked`.
    pub actuators: Vec<(String, &'static str)>,
    /// The proved guidance rates, when the certificate has them: the level and each rate's
    /// proved range.
    pub rates: Option<ProvedRates>,
    /// The saturated law's region of attraction, when the certificate has it: the level and
    /// each error's bounds inside it.
    pub saturated: Option<ProvedRegion>,
}

/// A region of attraction of the saturated law as re-checked: the level {V ≤ level}, and per
/// state its error's proved bounds inside it.
pub type ProvedRegion = (f64, Vec<(String, (f64, f64))>);

/// Proved guidance rates as re-checked: the level, and each rate's name and proved range.
pub type ProvedRates = (f64, Vec<(String, (f64, f64))>);

/// Why a certificate was rejected.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Rejection(pub String);

impl std::fmt::Display for Rejection {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for Rejection {}

fn reject<T>(msg: impl Into<String>) -> Result<T, Rejection> {
    Err(Rejection(msg.into()))
}

fn field<'a>(v: &'a Value, key: &str, at: &str) -> Result<&'a Value, Rejection> {
    v.get(key)
        .ok_or_else(|| Rejection(format!("{at}: missing field `{key}`")))
}

/// Re-checks a certificate against the spec it claims (already prepared by
/// [`crate::prepare`] from the spec whose bytes hash to `spec_sha256`).
pub fn recheck(
    cert: &Value,
    spec_sha256: &str,
    prepared: &Prepared,
) -> Result<Rechecked, Rejection> {
    if field(cert, "version", "certificate")?.as_u64() != Some(CERTIFICATE_VERSION) {
        return reject(format!("certificate version is not {CERTIFICATE_VERSION}"));
    }
    let sha = field(field(cert, "spec", "certificate")?, "sha256", "spec")?;
    if sha.as_str() != Some(spec_sha256) {
        return reject(format!(
            "the spec's SHA-256 is {spec_sha256} but the certificate was written for {}",
            sha.as_str().unwrap_or("?")
        ));
    }
    let claim = field(cert, "claim", "certificate")?;
    if claim.as_str() != Some(prepared.claim.name().as_str()) {
        return reject(format!(
            "the certificate proves the claim {claim}, the spec states `{}`",
            prepared.claim.name()
        ));
    }
    // the domain must be the spec's, bound for bound
    let domain = field(cert, "domain", "certificate")?
        .as_array()
        .ok_or_else(|| Rejection("`domain` is not a list".into()))?;
    let vars = &prepared.problem.variables;
    if domain.len() != vars.len() {
        return reject(format!(
            "the certificate's domain has {} coordinates, the spec's {}",
            domain.len(),
            vars.len()
        ));
    }
    for (d, v) in domain.iter().zip(vars) {
        let range = parse_pair(field(d, "range", "domain")?);
        if d.get("name").and_then(Value::as_str) != Some(v.name.as_str())
            || range != Some(Interval::new(v.lo, v.hi))
        {
            return reject(format!(
                "domain coordinate `{}` does not match the spec ({} in [{}, {}])",
                d.get("name").and_then(Value::as_str).unwrap_or("?"),
                v.name,
                v.lo,
                v.hi
            ));
        }
    }
    let goals = field(cert, "goals", "certificate")?
        .as_array()
        .ok_or_else(|| Rejection("`goals` is not a list".into()))?;
    if goals.len() != prepared.goals.len() {
        return reject(format!(
            "the certificate has {} goals, the spec gives {}",
            goals.len(),
            prepared.goals.len()
        ));
    }
    let mut out = Rechecked {
        verdict: Verdict::Proven,
        goals: 0,
        leaves: 0,
        counterexamples: 0,
        actuators: Vec::new(),
        rates: None,
        saturated: None,
    };
    let mut statuses = Vec::new();
    for (gi, (gj, pg)) in goals.iter().zip(&prepared.goals).enumerate() {
        let c = &pg.compiled;
        let at = format!("goal {} ({})", gi + 1, c.goal.label);
        let status = statement(gj, c, &at)?;
        statuses.push(status.to_string());
        // an ultimate bound's claim goal is proved at the certificate's level
        let mut at_level = None;
        if let (GoalKind::Claim, Some(_)) = (pg.kind, prepared.sublevel()) {
            if status == "proven" {
                let (level, leaves) = recheck_bound(gj, prepared, &at)?;
                out.leaves += leaves;
                at_level = Some(crate::bound::at_level(c, level));
            }
        }
        let c = at_level.as_ref().unwrap_or(c);
        evidence(gj, c, prepared.root(gi), status, &at, &mut out)?;
    }
    // each actuator's command against its limits, as the spec declares them
    let actuators = field(cert, "actuators", "certificate")?
        .as_array()
        .ok_or_else(|| Rejection("`actuators` is not a list".into()))?;
    if actuators.len() != prepared.actuators.len() {
        return reject(format!(
            "the certificate has {} actuators, the spec {}",
            actuators.len(),
            prepared.actuators.len()
        ));
    }
    for (k, (aj, ag)) in actuators.iter().zip(&prepared.actuators).enumerate() {
        let c = &ag.compiled;
        let at = format!("actuator `{}`", ag.actuator);
        if aj.get("actuator").and_then(Value::as_str) != Some(ag.actuator.as_str()) {
            return reject(format!("{at}: the certificate names another actuator here"));
        }
        let limits = limits_json(ag);
        if aj.get("limits") != Some(&limits) {
            return reject(format!("{at}: the limits differ from the spec's {limits}"));
        }
        let status = statement(aj, c, &at)?;
        let mut tally = Rechecked {
            actuators: Vec::new(),
            rates: None,
            saturated: None,
            ..out
        };
        let root = prepared.actuator_root(k);
        if let Some(point) = evidence(aj, c, root, status, &at, &mut tally)? {
            // outside the limits themselves, not only outside the test's f64 ends
            if !ag.outside(c.at_point(&point, &mut Scratch::default())) {
                return reject(format!(
                    "{at}: the recorded point is not outside the declared limits"
                ));
            }
        }
        out.leaves = tally.leaves;
        let word = match status {
            "proven" => "saturation-free",
            "refuted" => "saturates",
            "inconclusive" => "undecided",
            _ => "not checked",
        };
        out.actuators.push((ag.actuator.clone(), word));
    }
    let implied = if statuses.iter().any(|s| s == "refuted") {
        Verdict::Falsified
    } else if statuses.iter().all(|s| s == "proven") {
        Verdict::Proven
    } else {
        Verdict::Inconclusive
    };
    let stated = field(cert, "verdict", "certificate")?
        .as_str()
        .unwrap_or("");
    if stated != implied.name() {
        return reject(format!(
            "the certificate states `{stated}` but its goals give `{}`",
            implied.name()
        ));
    }
    out.verdict = implied;
    if let Some(r) = cert.get("rate_limits").filter(|v| !v.is_null()) {
        if implied != Verdict::Proven {
            return reject("guidance rates rest on a proven claim; this one is not proven");
        }
        let (rates, saturated, leaves) = recheck_rates(r, prepared)?;
        out.leaves += leaves;
        out.rates = Some(rates);
        out.saturated = saturated;
    }
    Ok(out)
}

/// Re-checks the proved guidance rates: the level's face proofs (V > level on every face of
/// the error box cut to the stated bounds), and each actuator's proof within its limits
/// wherever V ≤ level, over those bounds and the proved rates. Returns the level and the
/// rates, and the leaves re-evaluated.
fn recheck_rates(
    r: &Value,
    prepared: &Prepared,
) -> Result<(ProvedRates, Option<ProvedRegion>, usize), Rejection> {
    let at = "guidance rates";
    let bad = |what: &str| Rejection(format!("{at}: malformed ({what})"));
    if matches!(prepared.strategy, crate::plan::Strategy::Level { .. }) {
        return reject(format!("{at}: not for an ultimate-bound claim"));
    }
    let within: Vec<(String, f64)> = field(r, "within", at)?
        .as_object()
        .ok_or_else(|| bad("within"))?
        .iter()
        .map(|(k, v)| Some((k.clone(), parse_num(v)?)))
        .collect::<Option<_>>()
        .ok_or_else(|| bad("within"))?;
    for (s, b) in &within {
        let is_state = prepared
            .problem
            .variables
            .iter()
            .any(|v| v.role == crate::problem::Role::Error && &v.symbol == s);
        if !(is_state && *b > 0.0 && b.is_finite()) {
            return Err(bad("within"));
        }
    }
    let level = field(r, "level", at)
        .ok()
        .and_then(parse_num)
        .filter(|l| *l > 0.0 && l.is_finite())
        .ok_or_else(|| bad("level"))?;
    let mut problem = prepared.problem.clone();
    let sub = crate::bound::sublevel_goal(&mut problem, prepared.forms.candidate)
        .map_err(|e| Rejection(e.message))?;
    let cand = field(r, "candidate", at)?;
    if cand.get("expr").and_then(Value::as_str) != Some(sub.text.as_str())
        || cand.get("dims") != Some(&json!(sub.names))
    {
        return reject(format!("{at}: the candidate is not the spec's V"));
    }
    let root = crate::rates::root_within(prepared, &sub.dims, &within, &[]);
    let mut leaves = 0;
    let mut faces: Vec<(usize, f64)> = Vec::new();
    for (i, p) in field(r, "faces", at)?
        .as_array()
        .ok_or_else(|| bad("faces"))?
        .iter()
        .enumerate()
    {
        let at = format!("{at}, face proof {}", i + 1);
        let ((k, side, from, lv), n) = recheck_sublevel(p, &sub, &root, &at)?;
        if side != Side::Face || lv < level || (from != root[k].lo() && from != root[k].hi()) {
            return Err(bad("face"));
        }
        leaves += n;
        faces.push((k, from));
    }
    for &k in &sub.errors {
        for end in [root[k].lo(), root[k].hi()] {
            if end != 0.0 && !faces.contains(&(k, end)) {
                return reject(format!(
                    "{at}: no proof that V > {level} on the face {} = {end}",
                    sub.names[k]
                ));
            }
        }
    }
    // the proved rates, each within its declared range
    let declared: Vec<(usize, &crate::problem::Variable)> = prepared
        .problem
        .variables
        .iter()
        .enumerate()
        .filter(|(_, v)| v.role == crate::problem::Role::Rate)
        .collect();
    let listed = field(r, "rates", at)?
        .as_array()
        .ok_or_else(|| bad("rates"))?;
    if listed.len() != declared.len() {
        return Err(bad("rates"));
    }
    let mut rates = Vec::new();
    let mut boxes = Vec::new();
    for (rj, (i, v)) in listed.iter().zip(&declared) {
        let proved = rj
            .get("proved")
            .and_then(parse_pair)
            .ok_or_else(|| bad("rates"))?;
        if rj.get("name").and_then(Value::as_str) != Some(v.name.as_str())
            || proved.lo() < v.lo
            || proved.hi() > v.hi
        {
            return Err(bad("rates"));
        }
        rates.push((v.name.clone(), (proved.lo(), proved.hi())));
        boxes.push((*i, (proved.lo(), proved.hi())));
    }
    let (goals, index) =
        crate::rates::actuator_goals(prepared, level).map_err(|e| Rejection(e.message))?;
    if field(r, "sublevel_constraint", at)?.as_u64() != Some(index as u64) {
        return Err(bad("sublevel_constraint"));
    }
    let acts = field(r, "actuators", at)?
        .as_array()
        .ok_or_else(|| bad("actuators"))?;
    if acts.len() != goals.len() {
        return reject(format!("{at}: not every actuator is proved"));
    }
    for ((aj, g), ag) in acts.iter().zip(&goals).zip(&prepared.actuators) {
        let at = format!("{at}, actuator `{}`", ag.actuator);
        if aj.get("actuator").and_then(Value::as_str) != Some(ag.actuator.as_str()) {
            return reject(format!("{at}: the certificate names another actuator here"));
        }
        if statement(aj, g, &at)? != "proven" {
            return reject(format!("{at}: not proven"));
        }
        let rr = crate::rates::root_within(prepared, &g.dims, &within, &boxes);
        leaves += recheck_tree(aj, g, rr, &at)?;
    }
    let saturated = match r.get("saturated").filter(|v| !v.is_null()) {
        Some(sj) => {
            let (region, n) = recheck_saturated(sj, prepared, &sub, level, &within, &boxes)?;
            leaves += n;
            Some(region)
        }
        None => None,
    };
    Ok(((level, rates), saturated, leaves))
}

/// A sublevel proof's part of the box and level: coordinate, side, start, level.
type Part = (usize, Side, f64, f64);

/// One sublevel proof of a certificate section, re-checked over `root`: its coordinate (an
/// error of V), side, start and level. Returns them and the leaves.
fn recheck_sublevel(
    p: &Value,
    sub: &Compiled,
    root: &[Interval],
    at: &str,
) -> Result<(Part, usize), Rejection> {
    let bad = |what: &str| Rejection(format!("{at}: malformed ({what})"));
    let name = p.get("coordinate").and_then(Value::as_str).unwrap_or("");
    let k = sub
        .names
        .iter()
        .position(|n| n == name)
        .filter(|k| sub.errors.contains(k))
        .ok_or_else(|| bad("coordinate"))?;
    let side = p
        .get("side")
        .and_then(Value::as_str)
        .and_then(Side::from_name)
        .ok_or_else(|| bad("side"))?;
    let from = p
        .get("from")
        .and_then(parse_num)
        .filter(|f| *f >= root[k].lo() && *f <= root[k].hi())
        .ok_or_else(|| bad("from"))?;
    let level = p
        .get("level")
        .and_then(parse_num)
        .filter(|l| l.is_finite())
        .ok_or_else(|| bad("level"))?;
    let g = above(sub, level);
    let rr = sublevel_root(root, k, side, from);
    let n = recheck_tree(p, &g, rr, at)?;
    Ok(((k, side, from, level), n))
}

/// Re-checks the saturated law's region of attraction (see [`crate::rates::SaturatedRegion`]):
/// V above the level on every face of the whole error box, V above the saturation-free level
/// `free` beyond each bound of `within`, V̇ of the saturated law < 0 on the band between the
/// two levels over the proved `rates`, and each stated error bound by a proof at the level.
fn recheck_saturated(
    sj: &Value,
    prepared: &Prepared,
    sub: &Compiled,
    free: f64,
    within: &[(String, f64)],
    rates: &[(usize, (f64, f64))],
) -> Result<(ProvedRegion, usize), Rejection> {
    let at = "saturated law";
    let bad = |what: &str| Rejection(format!("{at}: malformed ({what})"));
    if field(sj, "free_level", at).ok().and_then(parse_num) != Some(free) {
        return reject(format!(
            "{at}: the saturation-free level is not the guidance rates' {free}"
        ));
    }
    let level = field(sj, "level", at)
        .ok()
        .and_then(parse_num)
        .filter(|l| *l > free && l.is_finite())
        .ok_or_else(|| bad("level"))?;
    let whole = crate::rates::root_within(prepared, &sub.dims, &[], &[]);
    let mut leaves = 0;
    let mut list = |key: &str| -> Result<Vec<Part>, Rejection> {
        let mut out = Vec::new();
        for (i, p) in field(sj, key, at)?
            .as_array()
            .ok_or_else(|| bad(key))?
            .iter()
            .enumerate()
        {
            let (part, n) = recheck_sublevel(p, sub, &whole, &format!("{at}, {key} {}", i + 1))?;
            leaves += n;
            out.push(part);
        }
        Ok(out)
    };
    let faces = list("faces")?;
    let outside = list("outside")?;
    let bound_proofs = list("bound_proofs")?;
    // 1. the connected part of {V <= level} lies inside the whole box
    for &k in &sub.errors {
        for end in [whole[k].lo(), whole[k].hi()] {
            let shown = faces
                .iter()
                .any(|&(j, s, f, l)| j == k && s == Side::Face && f == end && l >= level);
            if end != 0.0 && !shown {
                return reject(format!(
                    "{at}: no proof that V > {level} on the face {} = {end}",
                    sub.names[k]
                ));
            }
        }
    }
    // 2. V > free beyond every bound of `within`
    for (k, side, from) in crate::rates::beyond_within(prepared, sub, within) {
        let shown = outside
            .iter()
            .any(|&(j, s, f, l)| j == k && s == side && f == from && l >= free);
        if !shown {
            return reject(format!(
                "{at}: no proof that V > {free} where {} is beyond {from}",
                sub.names[k]
            ));
        }
    }
    // 3. V-dot of the saturated law on the band
    let (g, index) =
        crate::rates::saturated_goal(prepared, free, level).map_err(|e| Rejection(e.message))?;
    if field(sj, "constraint", at)?.as_u64() != Some(index as u64) {
        return Err(bad("constraint"));
    }
    let gj = field(sj, "goal", at)?;
    let gat = format!("{at}, dV/dt");
    if statement(gj, &g, &gat)? != "proven" || gj.get("region") != Some(&json!(g.region_text)) {
        return reject(format!("{gat}: not a proof of the spec's saturated dV/dt"));
    }
    let root = crate::rates::root_within(prepared, &g.dims, &[], rates);
    leaves += recheck_tree(gj, &g, root, &gat)?;
    // 4. the bounds inside {V <= level}
    let stated = field(sj, "bounds", at)?
        .as_array()
        .ok_or_else(|| bad("bounds"))?;
    if stated.len() != sub.errors.len() {
        return Err(bad("bounds"));
    }
    let mut bounds = Vec::new();
    for e in stated {
        let (state, lower, upper) =
            stated_bound(e, sub, prepared, &bound_proofs, &whole, level, at)?;
        bounds.push((state, (lower, upper)));
    }
    Ok(((level, bounds), leaves))
}

/// A stated bound on one error inside {V ≤ level}, `{"state", "lower", "upper"}`, shown by
/// the proofs: each end is zero at a zero end of the box (or at level zero), or a proof that
/// V exceeds the level, at or above it, starts at or inside that end. Returns the state and
/// the ends.
fn stated_bound(
    e: &Value,
    sub: &Compiled,
    prepared: &Prepared,
    proved: &[Part],
    root: &[Interval],
    level: f64,
    at: &str,
) -> Result<(String, f64, f64), Rejection> {
    let bad = || Rejection(format!("{at}: malformed (bounds)"));
    let state = e.get("state").and_then(Value::as_str).unwrap_or("");
    let k = sub
        .errors
        .iter()
        .copied()
        .find(|&k| prepared.problem.variables[sub.dims[k]].symbol == state)
        .ok_or_else(bad)?;
    let end = |key: &str| e.get(key).and_then(parse_num).ok_or_else(bad);
    let (lower, upper) = (end("lower")?, end("upper")?);
    let shown = |side: Side, b: f64, end: f64| {
        ((level == 0.0 || end == 0.0) && b == 0.0)
            || proved.iter().any(|&(j, s, f, l)| {
                j == k
                    && s == side
                    && l >= level
                    && if side == Side::Upper { f <= b } else { f >= b }
            })
    };
    if !shown(Side::Upper, upper, root[k].hi()) || !shown(Side::Lower, lower, root[k].lo()) {
        return reject(format!(
            "{at}: the bound [{lower}, {upper}] on `{state}` is not proved at level {level}"
        ));
    }
    Ok((state.to_string(), lower, upper))
}

/// A goal's statement in the certificate must be the spec's: its expression, test and
/// coordinates. Returns its status.
fn statement<'a>(gj: &'a Value, c: &Compiled, at: &str) -> Result<&'a str, Rejection> {
    if gj.get("expr").and_then(Value::as_str) != Some(c.text.as_str())
        || gj.get("test") != Some(&test_json(&c.goal.test))
        || gj.get("dims") != Some(&json!(c.names))
        || (c.goal.origin && gj.get("errors") != Some(&json!(super::exempt_names(c))))
    {
        return reject(format!(
            "{at}: expression, test or coordinates differ from the spec's"
        ));
    }
    Ok(field(gj, "status", at)?.as_str().unwrap_or(""))
}

/// Re-checks a goal's evidence for its status: every leaf of a proof's tree, or the
/// counterexample (returned, when it is one point).
fn evidence(
    gj: &Value,
    c: &Compiled,
    root: Vec<Interval>,
    status: &str,
    at: &str,
    out: &mut Rechecked,
) -> Result<Option<Vec<f64>>, Rejection> {
    out.goals += 1;
    match status {
        "proven" => {
            out.leaves += recheck_tree(gj, c, root, at)?;
            Ok(None)
        }
        "refuted" => {
            let cx = field(gj, "counterexample", at)?;
            let bad = || Rejection(format!("{at}: malformed counterexample"));
            let point = parse_point(field(cx, "point", at)?).ok_or_else(bad)?;
            let bracket = match cx.get("bracket").and_then(Value::as_array) {
                Some(ends) if ends.len() == 2 => Some([
                    parse_point(&ends[0]).ok_or_else(bad)?,
                    parse_point(&ends[1]).ok_or_else(bad)?,
                ]),
                Some(_) => return Err(bad()),
                None => None,
            };
            if point.len() != c.dims.len() {
                return reject(format!("{at}: the counterexample has the wrong dimension"));
            }
            let one_point = bracket.is_none().then(|| point.clone());
            let counter = Counter {
                point,
                value: f64::NAN,
                enclosure: Interval::point(0.0),
                bracket,
            };
            if !reconfirm(c, &counter, &mut Scratch::default()) {
                return reject(format!(
                    "{at}: the recorded counterexample does not refute the goal"
                ));
            }
            out.counterexamples += 1;
            Ok(one_point)
        }
        "inconclusive" | "skipped" => Ok(None),
        other => reject(format!("{at}: unknown status `{other}`")),
    }
}

/// Re-checks the ultimate-bound section of a proven claim: every sublevel proof's tree, and
/// that the proofs present imply the stated bounds and region of attraction. Returns the
/// level the claim goal must be proved at, and the leaves re-evaluated.
fn recheck_bound(gj: &Value, prepared: &Prepared, at: &str) -> Result<(f64, usize), Rejection> {
    let sub = prepared
        .sublevel()
        .ok_or_else(|| Rejection(format!("{at}: the spec's claim has no ultimate bound")))?;
    let b = field(gj, "ultimate_bound", at)?;
    let bad = |what: &str| Rejection(format!("{at}: malformed ultimate bound ({what})"));
    let level = field(b, "level", at)
        .ok()
        .and_then(parse_num)
        .ok_or_else(|| bad("level"))?;
    let attraction = field(b, "attraction", at)
        .ok()
        .and_then(parse_num)
        .ok_or_else(|| bad("attraction"))?;
    if !(level >= 0.0 && level.is_finite() && attraction >= 0.0 && attraction.is_finite()) {
        return Err(bad("level"));
    }
    let root = prepared.sublevel_root();
    let mut proved: Vec<Part> = Vec::new();
    let mut leaves = 0;
    for (i, p) in field(b, "sublevel", at)?
        .as_array()
        .ok_or_else(|| bad("sublevel"))?
        .iter()
        .enumerate()
    {
        let (part, n) =
            recheck_sublevel(p, sub, &root, &format!("{at}, sublevel proof {}", i + 1))?;
        leaves += n;
        proved.push(part);
    }
    // every face of the error box at the attraction level
    for &k in &sub.errors {
        for end in [root[k].lo(), root[k].hi()] {
            if end != 0.0
                && attraction > 0.0
                && !proved
                    .iter()
                    .any(|&(pk, s, f, l)| pk == k && s == Side::Face && f == end && l == attraction)
            {
                return reject(format!(
                    "{at}: no proof that V > {attraction} on the face {} = {end}",
                    sub.names[k]
                ));
            }
        }
    }
    if level > 0.0 && level >= attraction {
        return reject(format!(
            "{at}: the level {level} is not below the region of attraction {attraction}"
        ));
    }
    // every stated bound by a proof at the level
    let mut stated: Vec<(String, f64)> = Vec::new();
    for e in field(b, "bounds", at)?
        .as_array()
        .ok_or_else(|| bad("bounds"))?
    {
        let (state, lower, upper) = stated_bound(e, sub, prepared, &proved, &root, level, at)?;
        stated.push((state, lower.abs().max(upper.abs())));
    }
    // the required bounds are the spec's, never the certificate's own list: each must be met
    // by a bound proved above
    let listed: Option<Vec<(String, f64)>> = field(b, "required", at)?
        .as_array()
        .ok_or_else(|| bad("required"))?
        .iter()
        .map(|r| {
            Some((
                r.get("state")?.as_str()?.to_string(),
                r.get("bound").and_then(parse_num)?,
            ))
        })
        .collect();
    if listed.as_deref() != Some(prepared.required()) {
        return reject(format!(
            "{at}: the certificate's required bounds differ from the spec's ({})",
            required_text(prepared.required())
        ));
    }
    for (state, need) in prepared.required() {
        match stated.iter().find(|(s, _)| s == state) {
            Some((_, got)) if got <= need => {}
            Some((_, got)) => {
                return reject(format!(
                    "{at}: the proved bound {got} on `{state}` exceeds the spec's required {need}"
                ))
            }
            None => {
                return reject(format!(
                    "{at}: the spec requires a bound on `{state}`, and the certificate proves none"
                ))
            }
        }
    }
    Ok((level, leaves))
}

fn required_text(required: &[(String, f64)]) -> String {
    if required.is_empty() {
        return "none".into();
    }
    required
        .iter()
        .map(|(s, b)| format!("|{s}| <= {b}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Walks a goal's split tree from the root box, checks every recorded leaf box against the
/// recomputed one, and re-evaluates every leaf's evidence in parallel. Returns the leaf count.
fn recheck_tree(
    gj: &Value,
    c: &Compiled,
    root: Vec<Interval>,
    at: &str,
) -> Result<usize, Rejection> {
    let shape: Vec<i64> = field(gj, "tree", at)?
        .as_array()
        .and_then(|a| a.iter().map(Value::as_i64).collect())
        .ok_or_else(|| Rejection(format!("{at}: `tree` is not a list of integers")))?;
    let leaves = field(gj, "leaves", at)?
        .as_array()
        .ok_or_else(|| Rejection(format!("{at}: `leaves` is not a list")))?;
    // recompute the leaf boxes from the shape
    let mut boxes = Vec::new();
    let mut stack = vec![root];
    let mut pos = 0;
    while let Some(bx) = stack.pop() {
        let Some(&s) = shape.get(pos) else {
            return reject(format!("{at}: the tree ends before covering the domain"));
        };
        pos += 1;
        if s < 0 {
            boxes.push(bx);
        } else {
            let d = s as usize;
            if d >= bx.len() || !(bx[d].mid() > bx[d].lo() && bx[d].mid() < bx[d].hi()) {
                return reject(format!("{at}: the tree splits along an invalid dimension"));
            }
            let (lo, hi) = halves(&bx, d);
            stack.push(hi);
            stack.push(lo);
        }
    }
    if pos != shape.len() || boxes.len() != leaves.len() {
        return reject(format!(
            "{at}: the tree has {} leaves and {} entries, the certificate lists {} leaves",
            boxes.len(),
            shape.len(),
            leaves.len()
        ));
    }
    let strict = matches!(c.goal.test, Test::Negative { strict: true });
    let bad: Option<String> = boxes
        .par_iter()
        .zip(leaves.par_iter())
        .enumerate()
        .map_init(Scratch::default, |s, (li, (bx, leaf))| {
            let recorded: Option<Vec<Interval>> = leaf
                .get("box")
                .and_then(Value::as_array)
                .and_then(|a| a.iter().map(parse_pair).collect());
            if recorded.as_deref() != Some(bx.as_slice()) {
                return Some(format!(
                    "leaf {li}: its box is not the one its tree position gives"
                ));
            }
            if let Some(b) = leaf.get("bound") {
                let recorded = parse_pair(b);
                let holds_origin = c.holds_origin(bx);
                let (f, _) = c.enclose(bx, s);
                if recorded != Some(f) {
                    return Some(format!(
                        "leaf {li}: recorded bound {b} but the box evaluates to [{}, {}]",
                        f.lo(),
                        f.hi()
                    ));
                }
                let exempt = holds_origin && strict;
                if exempt || !c.goal.test.proves(f) {
                    return Some(format!("leaf {li}: its bound does not prove the goal"));
                }
            } else if let Some(h) = leaf.get("hessian") {
                let method = h
                    .get("method")
                    .and_then(Value::as_str)
                    .and_then(Method::from_name);
                let value = h.get("value").and_then(parse_num);
                let (Some(method), Some(value)) = (method, value) else {
                    return Some(format!("leaf {li}: malformed Hessian evidence"));
                };
                let v = c.origin_measure(method, bx, s);
                let passes = if strict { v < 0.0 } else { v <= 0.0 };
                if v.to_bits() != value.to_bits() || !passes {
                    return Some(format!(
                        "leaf {li}: recorded Hessian value {value} but the box gives {v}"
                    ));
                }
            } else if leaf.get("unclamped").is_some() {
                if !c.unclamped_on(bx, s) {
                    return Some(format!(
                        "leaf {li}: a command may leave its limits on its box, or the box holds the claim's exempt zero"
                    ));
                }
            } else if let Some(v) = leaf.get("below_level") {
                let recorded = parse_pair(v);
                match c.feasibility(bx, s) {
                    Feasibility::Below(f) if Some(f) == recorded && f.hi() < c.level => {}
                    _ => {
                        return Some(format!(
                            "leaf {li}: V is not below the level {} on its box",
                            c.level
                        ))
                    }
                }
            } else if let Some(i) = leaf.get("excluded").and_then(Value::as_u64) {
                if c.feasibility(bx, s) != Feasibility::None(i as usize) {
                    return Some(format!(
                        "leaf {li}: constraint {i} does not fail everywhere on its box"
                    ));
                }
            } else {
                return Some(format!("leaf {li}: no evidence"));
            }
            None
        })
        .find_first(Option::is_some)
        .flatten();
    match bad {
        Some(msg) => reject(format!("{at}: {msg}")),
        None => Ok(boxes.len()),
    }
}

/// Each output of a certificate's round-off section with its re-checked bound in f64 and
/// f32, and the leaves re-evaluated.
pub type RecheckedRoundoff = (Vec<(String, [f64; 2])>, usize);

/// Re-checks a certificate's round-off bounds, if it has them, against the spec: the program
/// analysed, its inputs, the input map and the box of each precision must be what lawsmith
/// builds from the spec (so the bounds are about the code emitted from it, over every input
/// that code accepts); then every leaf of every output's split tree is analysed again and
/// must stay within the stated bound.
pub fn recheck_roundoff(
    cert: &Value,
    spec: &lawsmith_spec::Spec,
) -> Result<Option<RecheckedRoundoff>, Rejection> {
    use crate::roundoff::{law_domain, leaf_bound, leaves_of};
    use lawsmith_codegen::Float;
    let Some(r) = cert.get("roundoff").filter(|v| !v.is_null()) else {
        return Ok(None);
    };
    let at = "round-off";
    let bad = |what: &str| Rejection(format!("{at}: malformed ({what})"));
    let c = lawsmith_codegen::Controller::new(spec)
        .map_err(|e| Rejection(format!("{at}: the spec has no code to bound: {}", e.0)))?;
    let precisions = field(r, "precisions", at)?
        .as_array()
        .ok_or_else(|| bad("precisions"))?;
    if precisions.len() != 2 {
        return reject(format!("{at}: not one section per precision (f64, f32)"));
    }
    let mut rows: Vec<(String, [f64; 2])> = Vec::new();
    let mut leaves_total = 0;
    for (k, (pj, float)) in precisions.iter().zip([Float::F64, Float::F32]).enumerate() {
        let name = if float == Float::F64 { "f64" } else { "f32" };
        if pj.get("float").and_then(Value::as_str) != Some(name) {
            return reject(format!("{at}: precision {k} is not {name}"));
        }
        let (law, map, coords, names) = law_domain(&c, float);
        // what the spec gives, written as the certificate writes it
        let skeleton = super::roundoff_json(&crate::roundoff::RoundoffReport {
            program: law.clone(),
            coordinates: names,
            leaves: 0,
            precisions: vec![(float, map.clone(), coords.clone(), Vec::new())],
        });
        for key in ["inputs", "program", "rounded", "outputs", "coordinates"] {
            if r.get(key) != skeleton.get(key) {
                return reject(format!("{at}: `{key}` is not what the spec's code gives"));
            }
        }
        let mine = &skeleton["precisions"][0];
        for key in ["input_map", "box"] {
            if pj.get(key) != mine.get(key) {
                return reject(format!(
                    "{at}: the {name} `{key}` is not the inputs the spec's code accepts"
                ));
            }
        }
        let bounds = field(pj, "bounds", at)?
            .as_array()
            .ok_or_else(|| bad("bounds"))?;
        if bounds.len() != law.outputs.len() {
            return reject(format!("{at}: not one bound per output"));
        }
        for (o, b) in bounds.iter().enumerate() {
            let output = &law.outputs[o].0;
            if b.get("output").and_then(Value::as_str) != Some(output.as_str()) {
                return reject(format!("{at}: bound {o} is not of `{output}`"));
            }
            let stated = parse_num(field(b, "bound", at)?).ok_or_else(|| bad("bound"))?;
            let tree: Vec<i32> = field(b, "tree", at)?
                .as_array()
                .ok_or_else(|| bad("tree"))?
                .iter()
                .map(|d| d.as_i64().map(|d| d as i32))
                .collect::<Option<_>>()
                .ok_or_else(|| bad("tree"))?;
            let leaves = leaves_of(&tree, &coords).ok_or_else(|| {
                Rejection(format!(
                    "{at}: the split tree of `{output}` ({name}) does not cover the box"
                ))
            })?;
            for leaf in &leaves {
                let mine = leaf_bound(&law, &map, leaf, float, o);
                if mine.is_nan() || mine > stated {
                    return reject(format!(
                        "{at}: a leaf of `{output}` ({name}) bounds its round-off by {mine:e}, above the stated {stated:e}"
                    ));
                }
            }
            leaves_total += leaves.len();
            if k == 0 {
                rows.push((output.clone(), [stated, f64::INFINITY]));
            } else {
                rows[o].1[1] = stated;
            }
        }
    }
    Ok(Some((rows, leaves_total)))
}
