//! `firemain permit`: each building's needed fire flow against the hydrants within reach of it,
//! flowing together, and the storage that feeds them, on stdout and in the report files.

use std::path::{Path, PathBuf};

use firemain::cli::CliError;
use firemain::fireflow::Split;
use firemain::hydraulics::Hydraulics;
use firemain::model::buildings::{load_buildings, LoadedBuildings};
use firemain::model::project::load_project;
use firemain::model::Diagnostics;
use firemain::needed::{check_buildings, Method};
use firemain::permit::{analyse_building, PermitSetup};
use firemain::report::{self, permit::PermitReport};
use firemain::units::{Quantity, UnitSystem};

use super::{
    analysis_date, check_output_folder, criteria_for, emit, load, write_set, Outcome, VERSION,
};

/// Arguments of `firemain permit`.
#[derive(clap::Args)]
pub struct PermitArgs {
    /// Network folder.
    network: PathBuf,
    /// Buildings of the application (buildings.csv, see docs/buildings-format.md).
    #[arg(long, value_name = "FILE")]
    buildings: PathBuf,
    /// Criteria set (TOML) with a [needed_flow] section: the method and the hose-lay reach.
    #[arg(long)]
    criteria: PathBuf,
    /// Project file (project.toml): the report's title block.
    #[arg(long, value_name = "FILE")]
    project: Option<PathBuf>,
    /// Also write permit.csv, report.md, report.html and report.json here (with their
    /// manifest, manifest-permit.toml).
    #[arg(long)]
    out: Option<PathBuf>,
    /// How the hydrants within reach share a building's flow: each at the same residual
    /// pressure, or the same flow each.
    #[arg(long, value_enum, default_value = "equal-residual")]
    split: SplitArg,
    /// No messages on stderr (findings about the input files are still printed).
    #[arg(long)]
    quiet: bool,
}

/// `--split`.
#[derive(Clone, Copy, clap::ValueEnum)]
enum SplitArg {
    EqualResidual,
    Even,
}

pub fn run(args: &PermitArgs) -> Result<Outcome, CliError> {
    check_output_folder(args.out.as_deref(), &args.network)?;
    let project = args
        .project
        .as_deref()
        .map(|path| load_project(path).map_err(|diagnostics| CliError::Project { diagnostics }))
        .transpose()?;
    let loaded = load(&args.network)?;
    let net = &loaded.network;
    let criteria = criteria_for(&args.criteria, net)?;
    let settings = criteria
        .needed_flow
        .as_ref()
        .ok_or_else(|| CliError::NoNeededFlow(args.criteria.clone()))?;
    let (buildings, problems) = read_buildings(&args.buildings, net.units, &settings.method)?;
    let hydraulics = Hydraulics::new(net).map_err(CliError::Hydraulics)?;
    let setup = firemain::fireflow::FireFlowSetup::new(&hydraulics, &criteria)
        .map_err(|e| CliError::solve("max-day condition", net.units, e))?;
    let permit = PermitSetup {
        setup: &setup,
        settings,
        metres_per_unit: net.units.to_si(Quantity::Length, 1.0),
        split: match args.split {
            SplitArg::EqualResidual => Split::EqualResidual,
            SplitArg::Even => Split::Even,
        },
    };
    let mut ws = hydraulics.workspace();
    let results: Vec<_> = buildings
        .buildings
        .buildings
        .iter()
        .enumerate()
        .map(|(i, b)| analyse_building(&permit, &mut ws, i, b))
        .collect();
    let mut warnings = report::input_warnings(&loaded.diagnostics, &criteria.warnings);
    warnings.extend(
        buildings
            .diagnostics
            .iter()
            .chain(problems.iter())
            .filter(|d| d.severity == firemain::model::Severity::Warning)
            .cloned(),
    );
    let report = PermitReport {
        network: net,
        criteria: &criteria,
        settings,
        buildings: &buildings.buildings,
        results: &results,
        split: permit.split,
        project: project.as_ref(),
        input_warnings: &warnings,
        generated: analysis_date(),
        run_id: report::new_run_id(),
        version: VERSION,
    };
    emit(report.terminal());
    if let Some(out) = &args.out {
        write_set(out, &args.network, report.output_set(), args.quiet)?;
    }
    Ok(Outcome::from_findings(report.has_findings()))
}

/// The buildings file, read and checked against the needed-flow method: the buildings and the
/// method's findings about them, whose warnings (and the file's own) go to stderr as the
/// network's and the criteria's do (a run without --out would not show them otherwise). An
/// error when the file or the method refuses a building.
fn read_buildings(
    path: &Path,
    units: UnitSystem,
    method: &Method,
) -> Result<(LoadedBuildings, Diagnostics), CliError> {
    let buildings =
        load_buildings(path, units).map_err(|diagnostics| CliError::Buildings { diagnostics })?;
    let problems = check_buildings(&buildings.buildings, method);
    if problems.has_errors() {
        return Err(CliError::Buildings {
            diagnostics: problems,
        });
    }
    let mut findings = buildings.diagnostics.clone();
    findings.extend(problems.clone());
    if !findings.is_empty() {
        eprint!("{}", report::validate::diagnostics_brief(&findings));
    }
    Ok((buildings, problems))
}
