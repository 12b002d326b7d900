//! `verify`: re-run a bundle from its manifest's input and rules (or relocated copies,
//! recognised by their hashes) and compare every output hash.

use std::fs;
use std::path::{Path, PathBuf};

use crate::bundle::{file_name, sha256_file, Manifest};
use crate::config::{BuildConfig, InputConfig, Relocated};
use crate::rules::Rules;
use crate::{Error, Result};

use super::{build::build, stdout_write};

/// Run `verify`; exit 1 when an output changed or was not rebuilt bit for bit.
pub fn run(dir: &Path, moved: &Relocated) -> Result<i32> {
    let v = verify(dir, moved)?;
    let mut msg = String::new();
    if let Some(version) = &v.other_version {
        msg.push_str(&format!(
            "note: the bundle was made by panelready {version}, this is {}\n",
            env!("CARGO_PKG_VERSION")
        ));
    }
    for f in &v.missing {
        msg.push_str(&format!("missing from the bundle: {f}\n"));
    }
    for f in &v.changed {
        msg.push_str(&format!("changed since it was written: {f}\n"));
    }
    for f in &v.not_reproduced {
        msg.push_str(&format!("not reproduced by a fresh build: {f}\n"));
    }
    let ok = v.missing.is_empty() && v.changed.is_empty() && v.not_reproduced.is_empty();
    if ok {
        msg.push_str(&format!(
            "{}: every output matches its manifest hash and was rebuilt bit for bit\n",
            dir.display()
        ));
    }
    stdout_write(msg.as_bytes())?;
    Ok(if ok { 0 } else { 1 })
}

/// What `verify` found.
#[derive(Debug, Clone, Default)]
pub struct Verification {
    /// Files the manifest lists that are not in the bundle.
    pub missing: Vec<String>,
    /// Files in the bundle whose bytes no longer match the manifest.
    pub changed: Vec<String>,
    /// Files a fresh build produced differently.
    pub not_reproduced: Vec<String>,
    /// The tool version that made the bundle, if it differs from this one.
    pub other_version: Option<String>,
}

/// Checks that `path` holds the file the manifest recorded, by its hash; `what` and the
/// recorded name go into the message.
fn recognise(path: &Path, sha256: &str, what: &str, name: &str, given: bool) -> Result<()> {
    let hash = sha256_file(path).map_err(|e| Error::VerifyInput {
        path: path.to_path_buf(),
        message: if given {
            format!("the {what} file cannot be read ({e})")
        } else {
            format!(
                "the bundle's {what} file, where the manifest recorded it, cannot be read ({e}); \
                 was it moved? Pass its new place with --{what} PATH"
            )
        },
    })?;
    if hash != sha256 {
        let message = if given {
            format!(
                "not the bundle's {what} file: its SHA-256 differs from the one the manifest \
                 recorded for `{name}`"
            )
        } else {
            format!(
                "the bundle's {what} file has changed since the bundle was built (its SHA-256 \
                 differs)"
            )
        };
        return Err(Error::VerifyInput {
            path: path.to_path_buf(),
            message,
        });
    }
    Ok(())
}

/// Re-run the bundle in `dir` from its manifest's input and rules (or the files `moved`
/// names instead, recognised by their hashes) and compare every hash.
pub fn verify(dir: &Path, moved: &Relocated) -> Result<Verification> {
    let manifest_path = dir.join("manifest.json");
    if !manifest_path.exists() {
        return Err(Error::VerifyInput {
            path: dir.to_path_buf(),
            message: match dir.is_dir() {
                true => {
                    "not a bundle: the folder has no manifest.json (give the folder \
                         `build --out` wrote)"
                }
                false => "no such folder (give the folder `build --out` wrote)",
            }
            .into(),
        });
    }
    let text = fs::read_to_string(&manifest_path).map_err(Error::io(&manifest_path))?;
    let manifest: Manifest = serde_json::from_str(&text).map_err(|e| Error::Manifest {
        path: manifest_path.clone(),
        message: e.to_string(),
    })?;
    let recorded = PathBuf::from(&manifest.input.path);
    let input_name = if manifest.input.name.is_empty() {
        file_name(&recorded)
    } else {
        manifest.input.name.clone()
    };
    let input = moved.input.clone().unwrap_or(recorded);
    recognise(
        &input,
        &manifest.input.sha256,
        "input",
        &input_name,
        moved.input.is_some(),
    )?;
    let rules = match (&manifest.rules.path, &moved.rules) {
        (None, None) => Rules::empty(),
        (None, Some(p)) => {
            return Err(Error::VerifyInput {
                path: p.clone(),
                message: "the bundle was built without a rules file".into(),
            })
        }
        (Some(recorded), given) => {
            let p = given.clone().unwrap_or_else(|| PathBuf::from(recorded));
            let name = manifest
                .rules
                .name
                .clone()
                .unwrap_or_else(|| file_name(Path::new(recorded)));
            recognise(&p, &manifest.rules.sha256, "rules", &name, given.is_some())?;
            Rules::from_path(&p)?
        }
    };
    // Files the rules file names (joined tables, the corrections file) are read beside it:
    // they must be the ones the bundle was built from.
    let base = crate::assemble::rules_dir(&rules);
    let mut named: Vec<(PathBuf, &str)> = manifest
        .joins
        .iter()
        .map(|j| (base.join(&j.name), j.sha256.as_str()))
        .collect();
    if let (Some(c), Some(file)) = (&manifest.corrections, &rules.file.repair.corrections) {
        named.push((base.join(file), c.sha256.as_str()));
    }
    for (path, sha256) in named {
        if sha256_file(&path).ok().as_deref() != Some(sha256) {
            return Err(Error::VerifyInput {
                path,
                message: "not the file the bundle was built from (missing, or its SHA-256 \
                          differs from the manifest's); the rules file names it, relative to \
                          the rules file"
                    .into(),
            });
        }
    }
    let mut found = Verification {
        other_version: (manifest.tool_version != env!("CARGO_PKG_VERSION"))
            .then(|| manifest.tool_version.clone()),
        ..Verification::default()
    };
    for out in &manifest.outputs {
        // Hashed as it is read, a buffer at a time (panel.parquet may be gigabytes).
        let p = dir.join(&out.path);
        if !p.exists() {
            found.missing.push(out.path.clone());
        } else if sha256_file(&p).ok().as_deref() != Some(out.sha256.as_str()) {
            found.changed.push(out.path.clone());
        }
    }
    let scratch = tempdir_beside(dir)?;
    // The reports name the input file; a relocated input under another name is rebuilt
    // through a link carrying the recorded name.
    let input = if file_name(&input) == input_name {
        input
    } else {
        let link = scratch.join(&input_name);
        link_or_copy(&input, &link)?;
        link
    };
    let cfg = BuildConfig {
        input: InputConfig {
            memory_budget: None,
            path: input,
            format: manifest.input.format,
            rules,
            entity: manifest.input.entity.clone(),
            period: manifest.input.period.clone(),
            quiet: true,
            timings: false,
            csv: manifest.input.csv.clone().unwrap_or_default(),
            sheet: manifest.input.sheet.clone(),
        },
        out: scratch.join("bundle"),
        command_line: manifest.created_by_command.clone(),
        panel_csv: manifest.outputs.iter().any(|o| o.path == "panel.csv"),
        fail_on: None,
    };
    let rebuilt = build(&cfg);
    let _ = fs::remove_dir_all(&scratch);
    let rebuilt = rebuilt?;
    for out in &manifest.outputs {
        let again = rebuilt.outputs.iter().find(|o| o.path == out.path);
        if again.is_none_or(|a| a.sha256 != out.sha256) {
            found.not_reproduced.push(out.path.clone());
        }
    }
    Ok(found)
}

fn link_or_copy(from: &Path, to: &Path) -> Result<()> {
    let from = std::path::absolute(from).map_err(Error::io(from))?;
    #[cfg(unix)]
    let made = std::os::unix::fs::symlink(&from, to);
    #[cfg(not(unix))]
    let made = fs::copy(&from, to).map(|_| ());
    made.map_err(Error::io(to))
}

fn tempdir_beside(dir: &Path) -> Result<PathBuf> {
    let parent = std::path::absolute(dir)
        .map_err(Error::io(dir))?
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_else(|| PathBuf::from("."));
    let p = parent.join(format!(".panelready-verify-{}", std::process::id()));
    if p.exists() {
        fs::remove_dir_all(&p).map_err(Error::io(&p))?;
    }
    fs::create_dir(&p).map_err(Error::io(&p))?;
    Ok(p)
}
