//! `eccaudit fit FILE --plots DIR`: the least-squares fit's figures as SVG files (periodogram of
//! the period search, one phase fold per companion), drawn by eccaudit-plot like the page's.

use std::path::{Path, PathBuf};

use anyhow::Context;
use eccaudit_core::fit::figures::{phase_fold, search_periodogram};
use eccaudit_core::fit::{FitData, FitOptions, FitReport};
use eccaudit_plot::fit::{periodogram_figure, phase_figure};
use eccaudit_plot::plotters::prelude::{IntoDrawingArea, SVGBackend};
use eccaudit_plot::{draw_periodogram, draw_phase_fold};

/// Size of the periodogram figure [px].
const PERIODOGRAM_SIZE: (u32, u32) = (900, 520);
/// Size of a phase-fold figure [px].
const PHASE_SIZE: (u32, u32) = (900, 620);
/// Samples of the model curve over one phase.
const CURVE_POINTS: usize = 600;

/// Draws every figure of `report` into `dir` (created when missing); returns the files written.
pub fn write_plots(
    dir: &Path,
    data: &FitData,
    options: &FitOptions,
    report: &FitReport,
    time_label: &str,
) -> anyhow::Result<Vec<PathBuf>> {
    std::fs::create_dir_all(dir)
        .with_context(|| format!("cannot create the plot folder `{}`", dir.display()))?;
    let mut written = Vec::new();
    let pg = search_periodogram(data, options)?;
    let path = dir.join("periodogram.svg");
    {
        let root = SVGBackend::new(&path, PERIODOGRAM_SIZE).into_drawing_area();
        draw_periodogram(
            &root,
            &periodogram_figure(
                &pg,
                "Period search: periodogram of the velocities (companion 1)",
            ),
        )
        .map_err(|err| anyhow::anyhow!("cannot draw `{}`: {err}", path.display()))?;
    }
    written.push(path);
    let solution = report.adopted_solution();
    for companion in 1..=solution.companions.len() {
        let fold = phase_fold(
            data,
            solution,
            report.reference_time,
            companion,
            CURVE_POINTS,
        )?;
        let path = dir.join(format!("phase-c{companion}.svg"));
        {
            let root = SVGBackend::new(&path, PHASE_SIZE).into_drawing_area();
            draw_phase_fold(
                &root,
                &phase_figure(
                    &fold,
                    data,
                    time_label,
                    &format!("Companion {} folded on its fitted period", fold.companion),
                ),
            )
            .map_err(|err| anyhow::anyhow!("cannot draw `{}`: {err}", path.display()))?;
        }
        written.push(path);
    }
    Ok(written)
}
