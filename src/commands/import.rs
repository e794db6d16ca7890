//! `firemain import geojson`: a network folder from GIS layers, with a report of every change
//! (import.md, import.csv). The reading and the topology are `model::gis`; the report is
//! `report::import`.

use std::path::{Path, PathBuf};

use firemain::cli::CliError;
use firemain::model::gis::{import_geojson, ImportInputs};
use firemain::report::{self, OutputFile, OutputSet};

use super::{analysis_date, emit, load, write_set, Outcome, VERSION};

/// Arguments of `firemain import`.
#[derive(clap::Args)]
pub struct ImportArgs {
    #[command(subcommand)]
    format: ImportFormat,
}

#[derive(clap::Subcommand)]
enum ImportFormat {
    /// GeoJSON layers (pipes as lines; hydrants and sources as points) and a mapping file; see
    /// docs/gis.md.
    Geojson(GeojsonArgs),
}

#[derive(clap::Args)]
struct GeojsonArgs {
    /// Pipes: a FeatureCollection of LineStrings or MultiLineStrings.
    #[arg(long, value_name = "FILE")]
    pipes: PathBuf,
    /// Hydrants: a FeatureCollection of Points.
    #[arg(long, value_name = "FILE")]
    hydrants: Option<PathBuf>,
    /// Reservoirs and tanks: a FeatureCollection of Points at the ends of their pipes.
    #[arg(long, value_name = "FILE")]
    sources: Option<PathBuf>,
    /// Survey points for junction elevations: CSV with columns x, y, elevation.
    #[arg(long, value_name = "FILE")]
    elevations: Option<PathBuf>,
    /// Demand points, each added to its nearest junction: CSV with columns x, y, demand.
    #[arg(long, value_name = "FILE")]
    demands: Option<PathBuf>,
    /// The mapping of attributes to firemain's columns (TOML, see docs/gis.md).
    #[arg(long, value_name = "FILE")]
    mapping: PathBuf,
    /// The new network folder (must not exist, or be empty).
    #[arg(long, value_name = "FOLDER")]
    out: PathBuf,
    /// Do not list the files written.
    #[arg(long)]
    quiet: bool,
}

pub fn run(args: &ImportArgs) -> Result<Outcome, CliError> {
    match &args.format {
        ImportFormat::Geojson(a) => geojson(a),
    }
}

fn geojson(args: &GeojsonArgs) -> Result<Outcome, CliError> {
    refuse_non_empty(&args.out)?;
    let inputs = ImportInputs {
        pipes: &args.pipes,
        hydrants: args.hydrants.as_deref(),
        sources: args.sources.as_deref(),
        elevations: args.elevations.as_deref(),
        demands: args.demands.as_deref(),
        mapping: &args.mapping,
    };
    let imported =
        import_geojson(&inputs).map_err(|diagnostics| CliError::Import { diagnostics })?;
    let run_id = report::new_run_id();
    let generated = analysis_date();
    let mut files: Vec<OutputFile> = imported
        .network_files
        .into_iter()
        .map(|(name, bytes)| OutputFile { name, bytes })
        .collect();
    files.push(OutputFile {
        name: "import.md".into(),
        bytes: report::import::import_md(&imported.summary, &imported.events, &generated, &run_id)
            .into_bytes(),
    });
    let set = report::import::import_csv(&imported.events).map(|csv| {
        files.push(OutputFile {
            name: "import.csv".into(),
            bytes: csv,
        });
        OutputSet {
            command: "import",
            run_id,
            generated,
            generator: format!("firemain {VERSION}"),
            files,
        }
    });
    let inputs_dir = args
        .pipes
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    write_set(&args.out, inputs_dir, set, args.quiet)?;
    emit(summary_text(&imported.summary, &imported.events));
    // The folder is a network like any other: check it as `validate` would.
    load(&args.out)?;
    Ok(Outcome::Success)
}

/// Refuses an output folder that exists and holds anything.
fn refuse_non_empty(out: &Path) -> Result<(), CliError> {
    if !out.exists() {
        return Ok(());
    }
    let empty = out.is_dir()
        && std::fs::read_dir(out)
            .map(|mut d| d.next().is_none())
            .unwrap_or(false);
    if empty {
        Ok(())
    } else {
        Err(CliError::OutputNotEmpty(out.to_path_buf()))
    }
}

fn summary_text(
    s: &firemain::model::gis::Summary,
    events: &[firemain::model::gis::build::Event],
) -> String {
    use firemain::model::gis::build::Action;
    let counts: Vec<String> = Action::ALL
        .iter()
        .map(|a| {
            format!(
                "{} {}",
                events.iter().filter(|e| e.action == *a).count(),
                a.name()
            )
        })
        .collect();
    format!(
        "Imported {}: {} junctions, {} sources, {} pipes, {} hydrants (CRS {}).\nChanges: {}; see import.md.\n",
        s.name,
        s.junctions,
        s.sources,
        s.pipes,
        s.hydrants,
        s.crs.as_deref().unwrap_or("none"),
        counts.join(", ")
    )
}
