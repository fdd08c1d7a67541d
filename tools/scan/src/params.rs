//! The parameters of stance-scan and their check into a validated [`Config`].

use stance_core::error::{Error, Result};
use stance_core::host::shard::{ShardArgs, Sharding};
use stance_core::stance::{ClassMap, Stance};
use stance_core::time::Period;

use crate::analysis::ScanConfig;
use crate::models::Direction;

/// Which scan statistic.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum ModelChoice {
    /// The case class against the other at-risk classes on records (Kulldorff 1997).
    Bernoulli,
    /// Ordered classes oppose < neutral < support on records (Jung, Kulldorff & Klassen 2007).
    Ordinal,
    /// Case counts against the population at risk or expected counts on areas (Kulldorff 1997).
    Poisson,
    /// The mix of the unordered classes inside against outside on records (Jung, Kulldorff &
    /// Richard 2010).
    Multinomial,
    /// Records bursting in space and time against the margins of place and period; needs
    /// --time-field (Kulldorff, Heffernan, Hartman, Assunção & Mostashari 2005).
    SpaceTimePermutation,
}

impl ModelChoice {
    /// The model's name in summaries.
    pub fn name(self) -> &'static str {
        match self {
            ModelChoice::Bernoulli => "bernoulli",
            ModelChoice::Ordinal => "ordinal",
            ModelChoice::Poisson => "poisson",
            ModelChoice::Multinomial => "multinomial",
            ModelChoice::SpaceTimePermutation => "space-time-permutation",
        }
    }
}

/// Which way a count departs (Poisson).
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum DirectionChoice {
    /// More cases than expected.
    High,
    /// Fewer cases than expected.
    Low,
    /// Both.
    Both,
}

/// Parameters of stance-scan.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct ScanParams {
    /// Scan statistic: bernoulli (the case class against the other at-risk classes), ordinal
    /// (oppose < neutral < support), multinomial (the mix of the classes, unordered), poisson
    /// (case counts on areas) or space-time-permutation (records bursting in space and time;
    /// Kulldorff, Heffernan, Hartman, Assunção & Mostashari 2005).
    #[arg(long, value_enum, value_name = "MODEL", default_value = "bernoulli")]
    pub model: ModelChoice,

    /// Field holding the stance label (bernoulli, ordinal, multinomial).
    #[arg(long, value_name = "FIELD", default_value = "stance")]
    pub stance_field: String,

    /// Mapping of labels to classes, "label=class,…" (default: oppose/neutral/support and -1/0/1).
    #[arg(long, value_name = "LABEL=CLASS,…")]
    pub classes: Option<String>,

    /// Bernoulli: the stance class whose records are the cases (default oppose).
    /// Space-time-permutation: count only the records of this class (default: every at-risk
    /// record).
    #[arg(long, value_name = "CLASS")]
    pub case_class: Option<String>,

    /// Bernoulli, ordinal, multinomial: the stance classes whose records form the population at
    /// risk, comma-separated, or all; Bernoulli controls are these minus the case class.
    #[arg(long, value_name = "CLASSES", default_value = "all")]
    pub at_risk_classes: String,

    /// Bernoulli, ordinal: the side to look for, named by stance. Bernoulli: the case class
    /// (more cases than expected; the default), a control class (fewer cases, richer in
    /// controls) or both. Ordinal: support (shifted toward support), oppose or both (the
    /// default).
    #[arg(long, value_name = "SIDE")]
    pub toward: Option<String>,

    /// Poisson: the side to look for: high (more cases than expected; the default), low or both.
    #[arg(long, value_enum, value_name = "DIRECTION")]
    pub direction: Option<DirectionChoice>,

    /// Largest window as a share of all records (poisson: of the population at risk), in (0, 0.5].
    #[arg(long, value_name = "SHARE", default_value_t = 0.5)]
    pub max_share: f64,

    /// Largest window radius, in metres (default: no limit beyond --max-share).
    #[arg(long, value_name = "METRES")]
    pub max_radius_m: Option<f64>,

    /// Centre windows on a regular grid of this cell size (m) instead of on every distinct
    /// location; for very large data.
    #[arg(long, value_name = "METRES")]
    pub centres_cell_m: Option<f64>,

    /// Most clusters to report (the most likely and secondary ones sharing no location).
    #[arg(long, value_name = "N", default_value_t = 10)]
    pub max_clusters: usize,

    /// Report only clusters with a Monte Carlo p-value at most this.
    #[arg(long, value_name = "P", default_value_t = 1.0)]
    pub report_p: f64,

    /// Field holding each record's date-time: the scan then looks for cylinders, a circle × a
    /// run of consecutive periods (space-time scan). Records without a usable time are left out
    /// and counted.
    #[arg(long, value_name = "FIELD")]
    pub time_field: Option<String>,

    /// With --time-field: the calendar period (UTC) of the cylinders' runs.
    #[arg(long, value_enum, value_name = "PERIOD", default_value = "month")]
    pub period: Period,

    /// With --time-field: the longest run of periods in a cylinder (default: half the periods
    /// studied, at least 1).
    #[arg(long, value_name = "N")]
    pub max_duration: Option<usize>,

    /// Random relabellings for the p-values (0: none, p-values are left empty; space-time:
    /// random permutations of the records' periods or labels).
    #[arg(long, value_name = "N", default_value_t = 999)]
    pub replicates: usize,

    /// Poisson: polygon layer of the input with the areas.
    #[arg(long, value_name = "LAYER")]
    pub areas: Option<String>,

    /// Poisson: field of observed case counts (non-negative integers).
    #[arg(long, value_name = "FIELD")]
    pub case_field: Option<String>,

    /// Poisson: field of the population at risk (expected cases ∝ population).
    #[arg(long, value_name = "FIELD")]
    pub at_risk_field: Option<String>,

    /// Poisson: field of expected cases (rescaled to sum to the observed total).
    #[arg(long, value_name = "FIELD")]
    pub expected_field: Option<String>,

    /// Sharding of the replicates over several runs (e.g. a cluster's job array).
    #[command(flatten)]
    #[serde(flatten)]
    pub shards: ShardArgs,
}

/// What the records of a point scan are.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum RecordRoles {
    /// Bernoulli: the case class and the control classes (at risk, not the case class).
    Bernoulli {
        /// The case class.
        cases: Stance,
        /// The control classes, in class order.
        controls: Vec<Stance>,
    },
    /// Ordinal: the at-risk classes, in class order.
    Ordinal {
        /// The classes analysed.
        classes: Vec<Stance>,
    },
    /// Multinomial: the at-risk classes, in class order (their order plays no part).
    Multinomial {
        /// The classes analysed.
        classes: Vec<Stance>,
    },
    /// Space-time permutation: the classes whose records are counted, in class order.
    Permutation {
        /// The classes counted.
        classes: Vec<Stance>,
        /// Whether they are the case class given with --case-class.
        case_class: bool,
    },
}

/// The time of a space-time scan.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TimeConfig {
    /// Field of the records' date-times.
    pub field: String,
    /// Calendar period.
    pub period: Period,
    /// Longest run of periods (None: half the periods studied, at least 1).
    pub max_duration: Option<usize>,
}

/// The Poisson model's inputs.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct AreaFields {
    /// Polygon layer of the areas.
    pub layer: String,
    /// Field of observed cases.
    pub cases: String,
    /// Field of the population at risk or of expected cases.
    pub size: String,
    /// Whether `size` is a population at risk (else expected cases).
    pub is_population: bool,
}

/// What the scan reads.
#[derive(Debug, Clone)]
pub enum Subject {
    /// Records of the input's point layer.
    Records {
        /// Stance field.
        field: String,
        /// Label → class mapping.
        classes: ClassMap,
        /// Roles of the classes.
        roles: RecordRoles,
    },
    /// Areas with counts.
    Areas(AreaFields),
}

/// The validated parameters.
#[derive(Debug, Clone)]
pub struct Config {
    /// The model.
    pub model: ModelChoice,
    /// What is read.
    pub subject: Subject,
    /// The side asked for, as the user named it (`oppose`, `both`, `high`…).
    pub side_asked: String,
    /// The scan settings.
    pub scan: ScanConfig,
    /// Space-time scans: the time.
    pub time: Option<TimeConfig>,
    /// The whole run, one shard of its replicates, or the merge of the shards.
    pub sharding: Sharding,
}

impl ScanParams {
    /// Checks the parameters once, at the border.
    ///
    /// # Errors
    /// An argument error naming the option and the value.
    pub fn check(&self, seed: u64) -> Result<Config> {
        self.check_limits()?;
        let time = self.check_time()?;
        let (subject, direction, side_asked) = match self.model {
            ModelChoice::Poisson => self.check_poisson()?,
            ModelChoice::Bernoulli
            | ModelChoice::Ordinal
            | ModelChoice::Multinomial
            | ModelChoice::SpaceTimePermutation => self.check_records()?,
        };
        Ok(Config {
            model: self.model,
            subject,
            side_asked,
            scan: ScanConfig {
                direction,
                max_share: self.max_share,
                max_radius_m: self.max_radius_m,
                centres_cell_m: self.centres_cell_m,
                max_clusters: self.max_clusters,
                report_p: self.report_p,
                replicates: self.replicates,
                drawn: 0..self.replicates,
                given_max: None,
                observed: true,
                seed,
            },
            time,
            sharding: self.shards.sharding()?,
        })
    }

    fn check_time(&self) -> Result<Option<TimeConfig>> {
        let Some(field) = &self.time_field else {
            if self.model == ModelChoice::SpaceTimePermutation {
                return Err(Error::argument(
                    "--time-field",
                    "missing; the space-time-permutation model needs each record's date-time",
                ));
            }
            if self.max_duration.is_some() {
                return Err(Error::argument(
                    "--max-duration",
                    "is for space-time scans; give --time-field too",
                ));
            }
            return Ok(None);
        };
        if self.model == ModelChoice::Poisson {
            return Err(Error::argument(
                "--time-field",
                "is not for the poisson model on areas; space-time scans run on records",
            ));
        }
        if self.max_duration == Some(0) {
            return Err(Error::argument(
                "--max-duration",
                "0 periods; a cylinder lasts at least one period",
            ));
        }
        Ok(Some(TimeConfig {
            field: field.clone(),
            period: self.period,
            max_duration: self.max_duration,
        }))
    }

    fn check_limits(&self) -> Result<()> {
        if !(self.max_share > 0.0 && self.max_share <= 0.5) {
            return Err(Error::argument(
                "--max-share",
                format!(
                    "{} is outside (0, 0.5]; a window may hold at most half of the records",
                    self.max_share
                ),
            ));
        }
        for (option, value) in [
            ("--max-radius-m", self.max_radius_m),
            ("--centres-cell-m", self.centres_cell_m),
        ] {
            if let Some(v) = value {
                if !(v.is_finite() && v > 0.0) {
                    return Err(Error::argument(
                        option,
                        format!("{v} must be a positive number of metres"),
                    ));
                }
            }
        }
        if self.max_clusters == 0 {
            return Err(Error::argument("--max-clusters", "must be at least 1"));
        }
        if !(self.report_p > 0.0 && self.report_p <= 1.0) {
            return Err(Error::argument(
                "--report-p",
                format!("{} is outside (0, 1]", self.report_p),
            ));
        }
        Ok(())
    }

    fn check_poisson(&self) -> Result<(Subject, Direction, String)> {
        if self.toward.is_some() {
            return Err(Error::argument(
                "--toward",
                "is for the bernoulli and ordinal models; a poisson count has a direction: use --direction high|low|both",
            ));
        }
        let layer = self.areas.clone().ok_or_else(|| {
            Error::argument(
                "--areas",
                "missing; the poisson model needs a polygon layer of areas",
            )
        })?;
        let cases = self.case_field.clone().ok_or_else(|| {
            Error::argument(
                "--case-field",
                "missing; the poisson model needs the observed case counts",
            )
        })?;
        let (size, is_population) = match (&self.at_risk_field, &self.expected_field) {
            (Some(p), None) => (p.clone(), true),
            (None, Some(e)) => (e.clone(), false),
            (None, None) => {
                return Err(Error::argument(
                    "--at-risk-field",
                    "missing; the poisson model needs --at-risk-field or --expected-field",
                ))
            }
            (Some(_), Some(_)) => {
                return Err(Error::argument(
                    "--expected-field",
                    "give either --at-risk-field or --expected-field, not both",
                ))
            }
        };
        let (direction, asked) = match self.direction.unwrap_or(DirectionChoice::High) {
            DirectionChoice::High => (Direction::High, "high"),
            DirectionChoice::Low => (Direction::Low, "low"),
            DirectionChoice::Both => (Direction::Both, "both"),
        };
        let subject = Subject::Areas(AreaFields {
            layer,
            cases,
            size,
            is_population,
        });
        Ok((subject, direction, asked.to_owned()))
    }

    fn check_records(&self) -> Result<(Subject, Direction, String)> {
        if self.direction.is_some() {
            return Err(Error::argument(
                "--direction",
                "is for the poisson model; name the side by stance with --toward (e.g. --toward support, --toward both)",
            ));
        }
        for (option, given) in [
            ("--areas", self.areas.is_some()),
            ("--case-field", self.case_field.is_some()),
            ("--at-risk-field", self.at_risk_field.is_some()),
            ("--expected-field", self.expected_field.is_some()),
        ] {
            if given {
                return Err(Error::argument(option, "is only for --model poisson"));
            }
        }
        let classes = match &self.classes {
            Some(spec) => ClassMap::parse(spec).map_err(|m| Error::argument("--classes", m))?,
            None => ClassMap::default(),
        };
        let at_risk = parse_class_list("--at-risk-classes", &self.at_risk_classes)?;
        let toward = self.toward.as_deref();
        let (roles, direction, asked) = match self.model {
            ModelChoice::Bernoulli => bernoulli_roles(
                self.case_class.as_deref().unwrap_or("oppose"),
                at_risk,
                toward,
            )?,
            ModelChoice::Multinomial => multinomial_roles(at_risk, toward)?,
            ModelChoice::SpaceTimePermutation => {
                permutation_roles(self.case_class.as_deref(), at_risk, toward)?
            }
            _ => ordinal_roles(at_risk, toward)?,
        };
        let subject = Subject::Records {
            field: self.stance_field.clone(),
            classes,
            roles,
        };
        Ok((subject, direction, asked))
    }
}

/// A stance class named in `option`.
fn parse_class(option: &str, text: &str) -> Result<Stance> {
    Stance::from_canonical(text).ok_or_else(|| {
        Error::argument(
            option,
            format!(
                "'{}' is not a class; expected oppose, neutral or support",
                text.trim()
            ),
        )
    })
}

/// `all` or a comma-separated list of classes, in class order without repeats.
fn parse_class_list(option: &str, text: &str) -> Result<Vec<Stance>> {
    if text.trim().eq_ignore_ascii_case("all") {
        return Ok(Stance::ALL.to_vec());
    }
    let mut classes: Vec<Stance> = text
        .split(',')
        .map(str::trim)
        .filter(|c| !c.is_empty())
        .map(|c| parse_class(option, c))
        .collect::<Result<_>>()?;
    classes.sort();
    classes.dedup();
    if classes.is_empty() {
        return Err(Error::argument(
            option,
            "is empty; name classes, comma-separated, or all",
        ));
    }
    Ok(classes)
}

/// The label of the control side of a Bernoulli scan: its classes joined by '+'.
pub fn joined(classes: &[Stance]) -> String {
    classes
        .iter()
        .map(|c| c.label())
        .collect::<Vec<_>>()
        .join("+")
}

fn bernoulli_roles(
    case_class: &str,
    at_risk: Vec<Stance>,
    toward: Option<&str>,
) -> Result<(RecordRoles, Direction, String)> {
    let cases = parse_class("--case-class", case_class)?;
    if !at_risk.contains(&cases) {
        return Err(Error::argument(
            "--at-risk-classes",
            format!(
                "'{}' leaves out the case class '{cases}'; the population at risk includes the cases",
                joined(&at_risk).replace('+', ",")
            ),
        ));
    }
    let controls: Vec<Stance> = at_risk.into_iter().filter(|s| *s != cases).collect();
    if controls.is_empty() {
        return Err(Error::argument(
            "--at-risk-classes",
            format!("holds only the case class '{cases}'; name at least one control class too"),
        ));
    }
    let asked = toward.map_or_else(|| cases.label().to_owned(), |t| t.trim().to_owned());
    let direction = if asked.eq_ignore_ascii_case("both") {
        Direction::Both
    } else if Stance::from_canonical(&asked) == Some(cases) {
        Direction::High
    } else if asked.eq_ignore_ascii_case(&joined(&controls))
        || Stance::from_canonical(&asked).is_some_and(|s| controls.contains(&s))
    {
        Direction::Low
    } else {
        return Err(Error::argument(
            "--toward",
            format!(
                "'{asked}' is not a side of this scan; expected the case class {cases}, a control class ({}) or both",
                joined(&controls).replace('+', ", ")
            ),
        ));
    };
    Ok((RecordRoles::Bernoulli { cases, controls }, direction, asked))
}

fn ordinal_roles(
    at_risk: Vec<Stance>,
    toward: Option<&str>,
) -> Result<(RecordRoles, Direction, String)> {
    if at_risk.len() < 2 {
        return Err(Error::argument(
            "--at-risk-classes",
            "the ordinal model needs at least two classes",
        ));
    }
    let asked = toward.unwrap_or("both").trim().to_ascii_lowercase();
    let direction = match asked.as_str() {
        "both" => Direction::Both,
        "support" => Direction::High,
        "oppose" => Direction::Low,
        _ => {
            return Err(Error::argument(
                "--toward",
                format!(
                    "'{asked}' is not a side of the ordinal scan; expected support, oppose or both"
                ),
            ))
        }
    };
    Ok((RecordRoles::Ordinal { classes: at_risk }, direction, asked))
}

fn permutation_roles(
    case_class: Option<&str>,
    at_risk: Vec<Stance>,
    toward: Option<&str>,
) -> Result<(RecordRoles, Direction, String)> {
    if toward.is_some() {
        return Err(Error::argument(
            "--toward",
            "is not for the space-time-permutation model: it looks for more records than \
             expected (high clusters only)",
        ));
    }
    let roles = match case_class {
        Some(text) => RecordRoles::Permutation {
            classes: vec![parse_class("--case-class", text)?],
            case_class: true,
        },
        None => RecordRoles::Permutation {
            classes: at_risk,
            case_class: false,
        },
    };
    Ok((roles, Direction::High, "high".to_owned()))
}

fn multinomial_roles(
    at_risk: Vec<Stance>,
    toward: Option<&str>,
) -> Result<(RecordRoles, Direction, String)> {
    if toward.is_some() {
        return Err(Error::argument(
            "--toward",
            "is not for the multinomial model: it looks for any unusual mix of the classes and \
             reports in leans_to the class most over-represented inside",
        ));
    }
    if at_risk.len() < 2 {
        return Err(Error::argument(
            "--at-risk-classes",
            "the multinomial model needs at least two classes",
        ));
    }
    let classes = RecordRoles::Multinomial { classes: at_risk };
    Ok((classes, Direction::Both, "any".to_owned()))
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Parser)]
    struct Cli {
        #[command(flatten)]
        params: ScanParams,
    }

    fn check(args: &[&str]) -> Result<Config> {
        let mut all = vec!["scan"];
        all.extend_from_slice(args);
        Cli::try_parse_from(all).expect("parse").params.check(1)
    }

    fn option_of(args: &[&str]) -> String {
        match check(args) {
            Err(Error::BadArgument { option, .. }) => option,
            other => panic!("{args:?}: {other:?}"),
        }
    }

    #[test]
    fn bernoulli_sides_are_named_by_stance() {
        let c = check(&[]).expect("defaults");
        assert_eq!(c.scan.direction, Direction::High);
        assert_eq!(c.side_asked, "oppose");
        match c.subject {
            Subject::Records {
                roles: RecordRoles::Bernoulli { cases, controls },
                ..
            } => {
                assert_eq!(cases, Stance::Oppose);
                assert_eq!(controls, [Stance::Neutral, Stance::Support]);
            }
            other => panic!("{other:?}"),
        }
        let low = check(&["--toward", "support"]).expect("control side");
        assert_eq!(low.scan.direction, Direction::Low);
        let low = check(&["--toward", "neutral+support"]).expect("joined control side");
        assert_eq!(low.scan.direction, Direction::Low);
        let both = check(&["--case-class", "support", "--toward", "both"]).expect("both");
        assert_eq!(both.scan.direction, Direction::Both);
        let c = check(&[
            "--case-class",
            "support",
            "--at-risk-classes",
            "oppose,support",
        ])
        .expect("two classes");
        assert_eq!(c.scan.direction, Direction::High);
        assert_eq!(
            option_of(&["--at-risk-classes", "oppose,support", "--toward", "neutral"]),
            "--toward"
        );
    }

    #[test]
    fn at_risk_classes_must_hold_the_cases_and_a_control() {
        assert_eq!(
            option_of(&["--at-risk-classes", "neutral,support"]),
            "--at-risk-classes"
        );
        assert_eq!(
            option_of(&["--at-risk-classes", "oppose"]),
            "--at-risk-classes"
        );
        assert_eq!(
            option_of(&["--at-risk-classes", "maybe"]),
            "--at-risk-classes"
        );
        assert_eq!(option_of(&["--case-class", "maybe"]), "--case-class");
    }

    #[test]
    fn ordinal_defaults_to_both_and_poisson_keeps_direction() {
        let c = check(&["--model", "ordinal"]).expect("ordinal");
        assert_eq!(c.scan.direction, Direction::Both);
        let c = check(&["--model", "ordinal", "--toward", "support"]).expect("support");
        assert_eq!(c.scan.direction, Direction::High);
        let c = check(&["--model", "ordinal", "--toward", "oppose"]).expect("oppose");
        assert_eq!(c.scan.direction, Direction::Low);
        assert_eq!(
            option_of(&["--model", "ordinal", "--toward", "neutral"]),
            "--toward"
        );
        assert_eq!(
            option_of(&["--model", "ordinal", "--direction", "high"]),
            "--direction"
        );
        assert_eq!(option_of(&["--direction", "both"]), "--direction");
        let poisson = [
            "--model",
            "poisson",
            "--areas",
            "a",
            "--case-field",
            "c",
            "--at-risk-field",
            "p",
        ];
        let c = check(&poisson).expect("poisson");
        assert_eq!(c.scan.direction, Direction::High);
        let mut with_toward = poisson.to_vec();
        with_toward.extend_from_slice(&["--toward", "oppose"]);
        assert_eq!(option_of(&with_toward), "--toward");
        assert_eq!(
            option_of(&["--model", "poisson", "--areas", "a", "--case-field", "c"]),
            "--at-risk-field"
        );
        assert_eq!(option_of(&["--case-field", "c"]), "--case-field");
    }

    #[test]
    fn multinomial_takes_classes_and_no_side() {
        let c = check(&["--model", "multinomial"]).expect("multinomial");
        assert_eq!(c.side_asked, "any");
        match c.subject {
            Subject::Records {
                roles: RecordRoles::Multinomial { classes },
                ..
            } => assert_eq!(classes, Stance::ALL),
            other => panic!("{other:?}"),
        }
        assert_eq!(
            option_of(&["--model", "multinomial", "--toward", "support"]),
            "--toward"
        );
        assert_eq!(
            option_of(&["--model", "multinomial", "--at-risk-classes", "neutral"]),
            "--at-risk-classes"
        );
        assert_eq!(
            option_of(&["--model", "multinomial", "--direction", "high"]),
            "--direction"
        );
    }
}
