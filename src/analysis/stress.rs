//! Part stress at the operating point: each rated resistor's dissipation and each rated
//! capacitor's DC voltage against its rating and the usual derating.
//!
//! In: the design's parts with a `rating`, the netlist's node names and the operating
//! point's node voltages. Out: one [`StressReport`] per rated part. No formatting.

use serde::Serialize;

/// The fraction of a resistor's power rating it should stay under (common practice: half
/// the rating, for the temperature rise of a small resistor at the highest ambient).
pub const RESISTOR_POWER_DERATING: f64 = 0.5;

/// The fraction of a capacitor's voltage rating it should stay under (common practice for
/// film and ceramic parts, from memory; electrolytic and tantalum parts are usually derated
/// further, which the review leaves to the designer).
pub const CAPACITOR_VOLTAGE_DERATING: f64 = 0.8;

/// One rated part at the operating point.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct StressReport {
    /// Designator.
    pub part: String,
    /// `power` (a resistor, W) or `voltage` (a capacitor, V).
    pub quantity: &'static str,
    /// The dissipation or the DC voltage's magnitude.
    pub value: f64,
    /// The part's rating.
    pub rating: f64,
    /// The derated limit: the rating times [`RESISTOR_POWER_DERATING`] or
    /// [`CAPACITOR_VOLTAGE_DERATING`].
    pub derated_limit: f64,
    /// value ÷ rating.
    pub fraction: f64,
}

impl StressReport {
    /// True when the part is above its derated limit.
    pub fn over(&self) -> bool {
        self.value > self.derated_limit
    }
}

/// The stress of every rated resistor and capacitor, derated as the design's analysis
/// settings say (by default [`RESISTOR_POWER_DERATING`] and [`CAPACITOR_VOLTAGE_DERATING`]);
/// `voltage` gives a node's DC voltage by name (None for a node the bias does not know).
pub fn of(
    design: &crate::design::Design,
    voltage: impl Fn(&str) -> Option<f64>,
) -> Vec<StressReport> {
    use crate::design::PartKind;
    let settings = &design.analysis;
    design
        .parts
        .iter()
        .filter_map(|p| {
            let rating = p.rating?;
            let across = |[a, b]: &[String; 2]| Some(voltage(a)? - voltage(b)?);
            let (quantity, value, derating) = match &p.kind {
                PartKind::Resistor { between, value } => {
                    let v = across(between)?;
                    ("power", v * v / value.nominal, settings.resistor_power_derating)
                }
                PartKind::Capacitor { between, .. } => {
                    ("voltage", across(between)?.abs(), settings.capacitor_voltage_derating)
                }
                _ => return None,
            };
            Some(StressReport {
                part: p.name.clone(),
                quantity,
                value,
                rating,
                derated_limit: rating * derating,
                fraction: value / rating,
            })
        })
        .collect()
}
