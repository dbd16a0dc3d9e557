//! `fluxloom draw FOLDER`: SEDs, colour–colour and colour–magnitude diagrams of
//! a built output folder, as SVG (and PNG with `--png`).

use std::path::{Path, PathBuf};

use clap::Args;
use rayon::prelude::*;

use super::science::ScienceArgs;
use crate::error::{Error, Result};
use crate::plot::Figure;
use crate::science::compute::compute;
use crate::science::figures::{
    Locus, colour_colour_figure, colour_magnitude_figure, parse_colour, sed_figure,
};
use crate::science::sed_table::FieldSeds;

/// Arguments of `fluxloom draw`.
#[derive(Debug, Args)]
pub struct DrawArgs {
    /// Folder, plan and A_V (the A_V also sets the reddening vector's length).
    #[command(flatten)]
    pub science: ScienceArgs,
    /// Draw the SED of these objects (object ids).
    #[arg(long, value_name = "OBJECT_ID", num_args = 1..)]
    pub sed: Vec<String>,
    /// Draw the SED of every object.
    #[arg(long)]
    pub all_seds: bool,
    /// Colour–colour diagram "Y_COLOUR,X_COLOUR" of band ids, e.g. "tmass_j-tmass_h,tmass_h-tmass_ks".
    #[arg(long, value_name = "Y,X")]
    pub colour_colour: Vec<String>,
    /// Colour–magnitude diagram "COLOUR,BAND", e.g. "tmass_h-tmass_ks,tmass_ks".
    #[arg(long, value_name = "COLOUR,BAND")]
    pub colour_magnitude: Vec<String>,
    /// Reference locus for the diagrams: a CSV with columns x, y.
    #[arg(long, value_name = "FILE.csv")]
    pub locus: Option<PathBuf>,
    /// Length of the reddening vector when no --av is given, mag of A_V.
    #[arg(long, value_name = "MAG", default_value_t = 5.0)]
    pub vector_av: f64,
    /// Write PNG files (2 px per figure pixel) beside the SVG files.
    #[arg(long)]
    pub png: bool,
    /// Folder for the figures (default: FOLDER/figures).
    #[arg(long, short, value_name = "FOLDER")]
    pub out: Option<PathBuf>,
}

fn read_locus(path: &Path) -> Result<Locus> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
    let mut lines = text.lines();
    let header = lines.next().unwrap_or("").trim();
    if header != "x,y" {
        return Err(Error::format(
            path,
            format!("expected the header \"x,y\", found \"{header}\""),
        ));
    }
    let mut out = Vec::new();
    for (row, line) in lines.enumerate() {
        if line.trim().is_empty() {
            continue;
        }
        let bad = |column: &str, found: &str| Error::BadValue {
            path: path.to_path_buf(),
            row: row as u64 + 1,
            column: column.into(),
            expected: "a number of magnitudes".into(),
            found: found.into(),
        };
        let (a, b) = line.split_once(',').unwrap_or((line, ""));
        let x = a.trim().parse::<f64>().map_err(|_| bad("x", a.trim()))?;
        let y = b.trim().parse::<f64>().map_err(|_| bad("y", b.trim()))?;
        out.push((x, y));
    }
    Ok(out)
}

/// A file name from an object id or a colour: letters, digits, `_` and `-` kept.
fn file_stem(text: &str) -> String {
    text.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect()
}

fn save(fig: &Figure, dir: &Path, stem: &str, png: bool, written: &mut Vec<PathBuf>) -> Result<()> {
    let svg = dir.join(format!("{stem}.svg"));
    std::fs::write(&svg, fig.to_svg()).map_err(|e| Error::io(&svg, e))?;
    written.push(svg);
    if png {
        let path = dir.join(format!("{stem}.png"));
        let bytes = fig
            .to_png(2.0)
            .map_err(|e| Error::format(&path, e.to_string()))?;
        std::fs::write(&path, bytes).map_err(|e| Error::io(&path, e))?;
        written.push(path);
    }
    Ok(())
}

/// Runs `fluxloom draw`.
///
/// # Errors
/// Settings and reading errors, an unknown object id or band, writing errors.
pub fn run(args: &DrawArgs) -> Result<()> {
    let settings = args.science.settings()?;
    let folder = &args.science.folder;
    let seds = FieldSeds::read(folder)?;
    let sci = compute(&seds, &settings)?;
    let dir = args.out.clone().unwrap_or_else(|| folder.join("figures"));
    std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
    let av = args.science.av.unwrap_or(args.vector_av);
    let locus = args.locus.as_deref().map(read_locus).transpose()?;
    let colour = |text: &str, option: &str| {
        parse_colour(&seds, text).ok_or_else(|| {
            Error::Usage(format!(
                "{option}: \"{text}\" is not a colour of two bands of this field (band ids: {})",
                seds.bands
                    .iter()
                    .map(|b| b.id.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ))
        })
    };
    let mut written = Vec::new();
    let mut wanted: Vec<usize> = Vec::new();
    if args.all_seds {
        wanted.extend(0..seds.object_id.len());
    }
    for id in &args.sed {
        let k = seds.object_id.iter().position(|o| o == id).ok_or_else(|| {
            Error::Usage(format!(
                "--sed: no object \"{id}\" in {}",
                seds.path.display()
            ))
        })?;
        wanted.push(k);
    }
    // One figure per object, drawn in parallel; the files listed in order.
    let per_object: Vec<Vec<PathBuf>> = wanted
        .par_iter()
        .map(|&k| {
            let fig = sed_figure(&seds, &sci, k);
            let mut files = Vec::new();
            save(
                &fig,
                &dir,
                &format!("sed_{}", file_stem(&seds.object_id[k])),
                args.png,
                &mut files,
            )?;
            Ok(files)
        })
        .collect::<Result<_>>()?;
    written.extend(per_object.into_iter().flatten());
    for spec in &args.colour_colour {
        let (y, x) = spec.split_once(',').ok_or_else(|| {
            Error::Usage(format!(
                "--colour-colour: expected \"Y_COLOUR,X_COLOUR\", found \"{spec}\""
            ))
        })?;
        let (yc, xc) = (colour(y, "--colour-colour")?, colour(x, "--colour-colour")?);
        let fig = colour_colour_figure(&seds, &sci, yc, xc, av, locus.as_ref());
        save(
            &fig,
            &dir,
            &format!("cc_{}_{}", file_stem(y), file_stem(x)),
            args.png,
            &mut written,
        )?;
    }
    for spec in &args.colour_magnitude {
        let (c, m) = spec.split_once(',').ok_or_else(|| {
            Error::Usage(format!(
                "--colour-magnitude: expected \"COLOUR,BAND\", found \"{spec}\""
            ))
        })?;
        let xc = colour(c, "--colour-magnitude")?;
        let mb = seds.band_index(m.trim()).ok_or_else(|| {
            Error::Usage(format!("--colour-magnitude: no band \"{m}\" in this field"))
        })?;
        let fig = colour_magnitude_figure(&seds, &sci, xc, mb, av, locus.as_ref());
        save(
            &fig,
            &dir,
            &format!("cmd_{}_{}", file_stem(c), file_stem(m)),
            args.png,
            &mut written,
        )?;
    }
    if written.is_empty() {
        return Err(Error::Usage(
            "nothing to draw: give --sed, --all-seds, --colour-colour or --colour-magnitude".into(),
        ));
    }
    super::write_stdout(&format!(
        "wrote {} figures in {}\n",
        written.len(),
        dir.display()
    ))
}
