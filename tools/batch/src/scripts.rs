//! The three files of a plan: `shards.sbatch` (the job array; `tiles.sbatch` for tiles),
//! `merge.sbatch` and `submit.sh` (submits both, the merge after every part has succeeded).

use std::path::{Path, PathBuf};

use crate::args::{Budget, Plan, Resources};

/// A word quoted for a POSIX shell.
fn quote(word: &str) -> String {
    if !word.is_empty()
        && word
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "-_./=:,+@%".contains(c))
    {
        word.to_owned()
    } else {
        format!("'{}'", word.replace('\'', "'\\''"))
    }
}

/// `#SBATCH` lines shared by both jobs.
fn header(plan: &Plan, job: &str, minutes: u64, memory_mb: u64, log: &str) -> String {
    let mut text = format!(
        "#!/bin/bash\n\
         #SBATCH --job-name={job}\n\
         #SBATCH --chdir={}\n\
         #SBATCH --cpus-per-task={}\n\
         #SBATCH --mem={memory_mb}M\n\
         #SBATCH --time={}:{:02}:00\n\
         #SBATCH --output={}\n",
        quote(&plan.workdir.display().to_string()),
        plan.cpus,
        minutes / 60,
        minutes % 60,
        quote(&plan.dir.join("logs").join(log).display().to_string()),
    );
    if let Some(p) = &plan.partition {
        text.push_str(&format!("#SBATCH --partition={}\n", quote(p)));
    }
    text
}

/// The tool's command line, its arguments quoted.
fn command(stance: &Path, plan: &Plan) -> String {
    let mut words = vec![quote(&stance.display().to_string()), quote(&plan.tool)];
    words.extend(plan.args.iter().map(|a| quote(a)));
    words.push(format!("--threads {}", plan.cpus));
    words.join(" ")
}

/// The array job: shard K of N writes `<dir>/shards/shard_K.gpkg` (tile K:
/// `<dir>/tiles/tile_K.gpkg`).
pub fn shards_script(stance: &Path, plan: &Plan, r: &Resources) -> String {
    let word = plan.split.word();
    let parts_dir = plan.dir.join(format!("{word}s"));
    let what = match plan.split {
        crate::args::Split::Shards => "each writes only its partial result",
        crate::args::Split::Tiles => "each writes only its band of grid rows",
    };
    format!(
        "{}#SBATCH --array=1-{n}\n\
         # {Word} K of {n} of `stance {tool}`; {what}.\n\
         # Redo one {word} K: sbatch --array=K {word}s.sbatch\n\
         set -euo pipefail\n\
         exec {} {option} \"${{SLURM_ARRAY_TASK_ID}}/{n}\" --overwrite \\\n  \
         --output {}/\"{word}_${{SLURM_ARRAY_TASK_ID}}.gpkg\"\n",
        header(
            plan,
            &format!("stance-{}-{word}s", plan.tool),
            r.minutes,
            r.memory_mb,
            &format!("{word}_%a.log")
        ),
        command(stance, plan),
        quote(&parts_dir.display().to_string()),
        n = plan.shards,
        tool = plan.tool,
        option = plan.split.option(),
        Word = capitalised(word),
    )
}

fn capitalised(word: &str) -> String {
    let mut chars = word.chars();
    chars
        .next()
        .map(|c| c.to_uppercase().chain(chars).collect())
        .unwrap_or_default()
}

/// The merge job: the run's outputs from every shard or tile (refused, naming the part, if one
/// is missing or was written under other options).
pub fn merge_script(stance: &Path, plan: &Plan, r: &Resources) -> String {
    let word = plan.split.word();
    format!(
        "{}# Merges the {n} {word}s into {output}; the same outputs as one run of `stance {tool}`.\n\
         set -euo pipefail\n\
         exec {} {} {} --output {}{}\n",
        header(plan, &format!("stance-{}-merge", plan.tool), r.minutes, r.memory_mb, "merge.log"),
        command(stance, plan),
        plan.split.merge_option(),
        quote(&plan.dir.join(format!("{word}s")).display().to_string()),
        quote(&plan.output),
        if plan.overwrite { " --overwrite" } else { "" },
        n = plan.shards,
        output = plan.output,
        tool = plan.tool,
    )
}

/// Submits the array, then the merge with `--dependency=afterok` on it.
pub fn submit_script(plan: &Plan) -> String {
    let dir = quote(&plan.dir.display().to_string());
    let word = plan.split.word();
    format!(
        "#!/bin/sh\n\
         # Submits the {n} {word}s of `stance {tool}` and their merge, which starts only when every\n\
         # {word} has succeeded.\n\
         set -eu\n\
         array=$(sbatch --parsable {dir}/{word}s.sbatch)\n\
         array=${{array%%;*}}\n\
         merge=$(sbatch --parsable --dependency=afterok:\"$array\" {dir}/merge.sbatch)\n\
         echo \"{word}s: job $array (array 1-{n}); merge: job ${{merge%%;*}}\"\n",
        n = plan.shards,
        tool = plan.tool,
    )
}

/// Writes the three files (and the shards and logs directories) into the plan's directory.
///
/// # Errors
/// A directory or file that cannot be written.
pub fn write(stance: &Path, plan: &Plan, r: &Budget) -> Result<Vec<PathBuf>, String> {
    let parts = format!("{}s", plan.split.word());
    for sub in [parts.as_str(), "logs"] {
        let d = plan.dir.join(sub);
        std::fs::create_dir_all(&d).map_err(|e| format!("{}: {e}", d.display()))?;
    }
    let files = [
        (
            format!("{parts}.sbatch"),
            shards_script(stance, plan, &r.part),
        ),
        (
            "merge.sbatch".to_owned(),
            merge_script(stance, plan, &r.merge),
        ),
        ("submit.sh".to_owned(), submit_script(plan)),
    ];
    let mut written = Vec::new();
    for (name, text) in files {
        let path = plan.dir.join(name);
        std::fs::write(&path, text).map_err(|e| format!("{}: {e}", path.display()))?;
        written.push(path);
    }
    Ok(written)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plan() -> Plan {
        Plan {
            shards: 4,
            split: crate::args::Split::Shards,
            dir: PathBuf::from("/work/b"),
            cpus: 2,
            partition: Some("long".into()),
            fixed: None,
            tool: "density".into(),
            args: vec!["--input".into(), "my file.gpkg".into()],
            output: "out.gpkg".into(),
            overwrite: false,
            workdir: PathBuf::from("/data"),
        }
    }

    #[test]
    fn the_array_and_the_merge_ask_for_what_the_plan_says() {
        let r = Resources {
            minutes: 95,
            memory_mb: 700,
        };
        let shards = shards_script(Path::new("/opt/stance"), &plan(), &r);
        for line in [
            "#SBATCH --array=1-4",
            "#SBATCH --time=1:35:00",
            "#SBATCH --mem=700M",
            "#SBATCH --cpus-per-task=2",
            "#SBATCH --partition=long",
            "#SBATCH --chdir=/data",
            "exec /opt/stance density --input 'my file.gpkg' --threads 2 --shard \"${SLURM_ARRAY_TASK_ID}/4\"",
            "--output /work/b/shards/\"shard_${SLURM_ARRAY_TASK_ID}.gpkg\"",
        ] {
            assert!(shards.contains(line), "{line} not in:\n{shards}");
        }
        let merge = merge_script(Path::new("/opt/stance"), &plan(), &r);
        assert!(
            merge.contains("--merge-shards /work/b/shards --output out.gpkg"),
            "{merge}"
        );
        let submit = submit_script(&plan());
        assert!(
            submit.contains("--dependency=afterok:\"$array\""),
            "{submit}"
        );
        assert_eq!(quote("it's"), "'it'\\''s'");

        let tiles = Plan {
            split: crate::args::Split::Tiles,
            ..plan()
        };
        let array = shards_script(Path::new("/opt/stance"), &tiles, &r);
        assert!(
            array.contains("--tile \"${SLURM_ARRAY_TASK_ID}/4\"")
                && array.contains("--output /work/b/tiles/\"tile_${SLURM_ARRAY_TASK_ID}.gpkg\""),
            "{array}"
        );
        let merge = merge_script(Path::new("/opt/stance"), &tiles, &r);
        assert!(
            merge.contains("--merge-tiles /work/b/tiles --output out.gpkg"),
            "{merge}"
        );
        assert!(submit_script(&tiles).contains("/work/b/tiles.sbatch"));
    }
}
