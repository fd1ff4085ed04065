//! Writing the window table (format in README: *The window table*).

use crate::units::EnergyUnit;
use std::fmt::Write;

/// The header of one window's table, ending with the column-name line.
pub fn header(temperature_k: f64, unit: EnergyUnit, state: usize, lambdas: &[f64]) -> String {
    let mut s = String::new();
    let lams: Vec<String> = lambdas.iter().map(|l| format!("{l}")).collect();
    let _ = writeln!(s, "# legwork window table 1");
    let _ = writeln!(s, "# temperature_K: {temperature_k}");
    let _ = writeln!(s, "# energy_unit: {unit}");
    let _ = writeln!(s, "# state: {state}");
    let _ = writeln!(s, "# lambdas: {}", lams.join(" "));
    s.push_str("time\tdudl");
    for j in 0..lambdas.len() {
        let _ = write!(s, "\tu{j}");
    }
    s.push('\n');
    s
}

/// Appends one frame's row to `line`: time, dU/dλ and the energy at every state.
/// Energies get six decimals, far below any statistical error the table can carry.
#[inline]
pub fn push_row(line: &mut String, time: f64, dudl: f64, energies: impl Iterator<Item = f64>) {
    let _ = write!(line, "{time}\t{dudl:.6}");
    for u in energies {
        let _ = write!(line, "\t{u:.6}");
    }
    line.push('\n');
}
