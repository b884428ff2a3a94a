//! A readable text dump of the IR, used by the data-driven tests and by
//! `trilane check --ir`. One line per fact; numbers in one format.

use super::*;
use std::fmt::{self, Write};

/// One float format for every dump: up to 12 significant decimals, no
/// trailing zeros, `-0` printed as `0`.
pub fn num(x: f64) -> String {
    if x == 0.0 {
        return "0".into();
    }
    let s = format!("{x:.12}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" { "0".into() } else { s.to_owned() }
}

fn complex(z: Complex64) -> String {
    // Parts that print as zero are left out (`i^2` is -1, not -1+0i).
    if num(z.im) == "0" {
        num(z.re)
    } else if num(z.re) == "0" {
        format!("{}i", num(z.im))
    } else {
        format!(
            "{}{}{}i",
            num(z.re),
            if z.im < 0.0 { "-" } else { "+" },
            num(z.im.abs())
        )
    }
}

impl fmt::Display for Circuit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(f, "chip {}", self.name)?;
        match &self.process {
            None => writeln!(f, "  process (default)")?,
            Some(ProcessRef::Preset { name, .. }) => writeln!(f, "  process preset {name}")?,
            Some(ProcessRef::File { path, .. }) => writeln!(f, "  process file {path:?}")?,
        }
        for (i, q) in self.qubits.iter().enumerate() {
            writeln!(
                f,
                "  qubit {i} {} rails {} {} launch |{}>",
                q.name, q.rails[0], q.rails[1], q.launch
            )?;
        }
        for (i, m) in self.modes.iter().enumerate() {
            let role = match m.role {
                ModeRole::Rail { qubit, index } => format!("rail {} of qubit {qubit}", index),
                ModeRole::Free => "free".into(),
                ModeRole::Ancilla => "ancilla".into(),
            };
            writeln!(f, "  mode {i} {} {role} photons {}", m.name, m.photons)?;
        }
        for op in &self.ops {
            let mut line = String::new();
            match &op.kind {
                OpKind::Gate { gate, qubits } => {
                    write!(line, "{}", gate.name())?;
                    if let Some(a) = gate.angle() {
                        write!(line, "({})", num(a))?;
                    }
                    let names: Vec<&str> = qubits
                        .iter()
                        .map(|&q| self.qubits[q].name.as_str())
                        .collect();
                    write!(line, " on {}", names.join(" "))?;
                }
                OpKind::Rotate {
                    theta_rad,
                    phi_rad,
                    modes,
                } => write!(
                    line,
                    "rotate({}, {}) on {} {}",
                    num(*theta_rad),
                    num(*phi_rad),
                    self.modes[modes[0]].name,
                    self.modes[modes[1]].name
                )?,
                OpKind::Split {
                    cross_fraction,
                    modes,
                } => write!(
                    line,
                    "split({}) on {} {}",
                    num(*cross_fraction),
                    self.modes[modes[0]].name,
                    self.modes[modes[1]].name
                )?,
                OpKind::Phase { phase_rad, mode } => write!(
                    line,
                    "phase({}) on {}",
                    num(*phase_rad),
                    self.modes[*mode].name
                )?,
                OpKind::Unitary { modes, matrix } => {
                    let ms: Vec<&str> =
                        modes.iter().map(|&m| self.modes[m].name.as_str()).collect();
                    let rows: Vec<String> = (0..matrix.nrows())
                        .map(|i| {
                            let r: Vec<String> = (0..matrix.ncols())
                                .map(|j| complex(matrix[(i, j)]))
                                .collect();
                            format!("[{}]", r.join(", "))
                        })
                        .collect();
                    write!(line, "unitary on {} = [{}]", ms.join(" "), rows.join(", "))?;
                }
            }
            if !op.expanded_from.is_empty() {
                write!(line, "  (expanded, depth {})", op.expanded_from.len())?;
            }
            writeln!(f, "  op {line}")?;
        }
        for h in &self.heralds {
            writeln!(f, "  herald {} = {}", self.modes[h.mode].name, h.photons)?;
        }
        if let Some(d) = &self.detect {
            let mut names: Vec<&str> = d
                .qubits
                .iter()
                .map(|&q| self.qubits[q].name.as_str())
                .collect();
            names.extend(d.modes.iter().map(|&m| self.modes[m].name.as_str()));
            writeln!(f, "  detect {}", names.join(" "))?;
        }
        for r in &self.requirements {
            let unit = r.metric.unit();
            write!(
                f,
                "  require {} {} {}{}{}",
                r.metric.name(),
                r.op.as_str(),
                num(r.limit),
                if unit.is_empty() { "" } else { " " },
                unit
            )?;
            match r.yield_level {
                Some(y) => writeln!(f, " at yield {}", num(y))?,
                None => writeln!(f, " nominal")?,
            }
        }
        let t = &self.tolerances;
        for (k, v, u) in [
            ("edge_bias", t.edge_bias_um, "um"),
            ("thickness_bias", t.thickness_bias_um, "um"),
            ("edge_local", t.edge_local_um, "um"),
            ("roughness", t.roughness_um, "um"),
            ("correlation", t.correlation_um, "um"),
            ("phase", t.phase_rad, "rad"),
            ("wavelength", t.wavelength_um, "um"),
        ] {
            if let Some(v) = v {
                writeln!(f, "  tolerance {k} {} {u}", num(v))?;
            }
        }
        if let Some(b) = &self.band {
            writeln!(
                f,
                "  band {} um to {} um in {} step{}",
                num(b.start_um),
                num(b.stop_um),
                b.steps,
                if b.steps == 1 { "" } else { "s" }
            )?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    #[test]
    fn one_number_format() {
        assert_eq!(super::num(0.5), "0.5");
        assert_eq!(super::num(-0.0), "0");
        assert_eq!(super::num(std::f64::consts::PI), "3.14159265359");
        assert_eq!(super::num(-1e-15), "0");
        assert_eq!(super::num(6000.0), "6000");
    }
}
