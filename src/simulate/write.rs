//! Writing a simulated session folder and its truth file.

use super::{simulate, Scenario, Simulated};
use crate::error::{Error, Result};
use crate::output::{write_file_atomic, Staging};
use crate::session::EmgUnits;
use flate2::{Compression, GzBuilder};
use std::fmt::Write as _;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

/// `<session folder>.truth.json`, beside the session folder.
pub fn default_truth_path(session_dir: &Path) -> PathBuf {
    let name = session_dir
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "session".into());
    session_dir.with_file_name(format!("{name}.truth.json"))
}

/// Decimals enough to write times at `rate_hz` exactly.
fn time_decimals(rate_hz: f64) -> usize {
    ((rate_hz.log10().ceil() as usize) + 1).min(6)
}

/// Simulates `sc` and writes the session folder `out` and the truth file.
/// Refuses to replace existing outputs unless `force`.
pub fn write_session(
    sc: &Scenario,
    out: &Path,
    truth_path: Option<&Path>,
    force: bool,
) -> Result<Simulated> {
    let truth_path = truth_path.map_or_else(|| default_truth_path(out), Path::to_path_buf);
    if truth_path.exists() && !force {
        return Err(Error::Argument(format!(
            "{} already exists; pass --force to replace it",
            truth_path.display()
        )));
    }
    let sim = simulate(sc)?;
    let stage = Staging::new(out, force)?;
    let dir = stage.path().to_path_buf();
    let emg_name = if sc.gzip { "emg.csv.gz" } else { "emg.csv" };
    write_manifest(sc, &dir.join("session.toml"), emg_name)?;
    write_emg(sc, &sim, &dir.join(emg_name))?;
    write_intact(sc, &sim, &dir.join("intact.csv"))?;
    write_events(&sim, &dir.join("events.csv"))?;
    stage.commit()?;
    let json = serde_json::to_string(&sim.truth).map_err(|e| Error::Analysis(e.to_string()))?;
    write_file_atomic(&truth_path, json.as_bytes())?;
    Ok(sim)
}

fn write_manifest(sc: &Scenario, path: &Path, emg_name: &str) -> Result<()> {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "# Simulated session (scenario `{}`, seed {}).",
        sc.name, sc.seed
    );
    let _ = writeln!(s, "format = 1");
    let _ = writeln!(s, "subject = \"{}\"", sc.subject);
    let _ = writeln!(s, "recorded = \"{}\"", sc.recorded);
    let _ = writeln!(s, "residual_side = \"{}\"", sc.residual_side.as_str());
    let _ = writeln!(s, "protocol = \"{}\"", sc.protocol);
    let _ = writeln!(s, "protocol_start_s = {:?}", sc.lead_in_s);
    let _ = writeln!(
        s,
        "\n[emg]\nfile = \"{emg_name}\"\nrate_hz = {:?}\nunits = \"{}\"",
        sc.emg.rate_hz,
        sc.emg.units.as_str()
    );
    let _ = writeln!(
        s,
        "\n[intact]\nfile = \"intact.csv\"\nrate_hz = {:?}\noffset_s = {:?}",
        sc.intact.rate_hz, sc.intact.offset_s
    );
    for p in super::emg::site_positions(sc) {
        let _ = writeln!(
            s,
            "\n[[site]]\nid = \"{}\"\nangle_deg = {:?}\ndistance_cm = {:?}",
            p.id,
            super::round6(p.angle_deg),
            p.distance_cm
        );
    }
    for d in &sc.dof {
        let _ = writeln!(
            s,
            "\n[[dof]]\nid = \"{}\"\npositive = \"{}\"\nrange_deg = [{:?}, {:?}]",
            d.id, d.positive, d.range_deg[0], d.range_deg[1]
        );
    }
    std::fs::write(path, s).map_err(|e| Error::io(path, e))
}

fn create(path: &Path) -> Result<BufWriter<std::fs::File>> {
    let f = std::fs::File::create(path).map_err(|e| Error::io(path, e))?;
    Ok(BufWriter::with_capacity(1 << 20, f))
}

fn write_emg(sc: &Scenario, sim: &Simulated, path: &Path) -> Result<()> {
    let file = create(path)?;
    let mut w: Box<dyn Write> = if sc.gzip {
        Box::new(GzBuilder::new().mtime(0).write(file, Compression::new(6)))
    } else {
        Box::new(file)
    };
    let io = |e| Error::io(path, e);
    let mut line = String::with_capacity(256);
    line.push_str("time_s");
    for s in &sim.sites {
        line.push(',');
        line.push_str(&s.id);
    }
    line.push('\n');
    w.write_all(line.as_bytes()).map_err(io)?;
    let fs = sc.emg.rate_hz;
    let td = time_decimals(fs);
    let scale = 1.0 / sc.emg.units.to_millivolt();
    let n = sim.emg.first().map_or(0, Vec::len);
    for i in 0..n {
        line.clear();
        let _ = write!(line, "{:.*}", td, i as f64 / fs);
        for ch in &sim.emg {
            let v = ch[i] * scale;
            let _ = match sc.emg.units {
                EmgUnits::Microvolt => write!(line, ",{}", v.round() as i64),
                EmgUnits::Millivolt => write!(line, ",{:.4}", v),
                EmgUnits::Volt => write!(line, ",{:.7}", v),
            };
        }
        line.push('\n');
        w.write_all(line.as_bytes()).map_err(io)?;
    }
    w.flush().map_err(io)?;
    Ok(())
}

fn write_intact(sc: &Scenario, sim: &Simulated, path: &Path) -> Result<()> {
    let mut w = create(path)?;
    let io = |e| Error::io(path, e);
    let mut line = String::from("time_s");
    for d in &sc.dof {
        line.push(',');
        line.push_str(&d.id);
    }
    line.push('\n');
    w.write_all(line.as_bytes()).map_err(io)?;
    let td = time_decimals(sc.intact.rate_hz).max(4);
    for (j, t) in sim.glove.time_s.iter().enumerate() {
        line.clear();
        let _ = write!(line, "{:.*}", td, t);
        for a in &sim.glove.angles {
            let _ = write!(line, ",{:.2}", a[j]);
        }
        line.push('\n');
        w.write_all(line.as_bytes()).map_err(io)?;
    }
    w.flush().map_err(io)
}

fn write_events(sim: &Simulated, path: &Path) -> Result<()> {
    let mut s = String::from("start_s,end_s,task,dof\n");
    for b in &sim.truth.blocks {
        let dof = if b.dofs.len() == 1 {
            b.dofs[0].as_str()
        } else {
            "*"
        };
        let _ = writeln!(s, "{:.3},{:.3},{},{}", b.start_s, b.end_s, b.task, dof);
    }
    std::fs::write(path, s).map_err(|e| Error::io(path, e))
}
