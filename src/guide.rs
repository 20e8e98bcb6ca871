//! `sworn help [TOPIC]` and `sworn completions SHELL`: help that teaches.

use crate::cli::Cli;
use crate::error::{Error, Result};
use clap::CommandFactory;

/// The plan's sections, what each holds and where it is documented.
const PLAN_PAGE: &str = "\
A plan is one TOML file. Its sections, in the order a plan usually gives them
(every key: docs/plan-reference.md, under the heading named on the right):

  format = 1                  required; the plan format            Top level
  [study]                     title (required), id, authors,       Top level
                              registered, summary
  [inference]                 alpha, distribution, confidence      Top level
  [data.NAME]                 a data file: path, format, rows,     Data tables
                              key, order_by, max_missing_share
  [data.NAME.columns]         the declared schema: kind, min,      Data tables
                              max, unit per column
  [derive]                    derived variables as expressions     Expressions
  [assignment]                how treatment was assigned           Top level
  [[specification]]           the regressions (at least one)       Specifications
  [[contingency]]             decision rules fixed in advance      Contingencies
  [family.NAME]               multiple-testing families            Top level
  [[hypothesis]]              the claims, each tied to a term      Hypotheses
  [resampling]                seed and draws for randomization     Resampled inference
                              inference and the wild bootstrap
  [[index]], [balance],       summary indices, balance and         Summary indices,
  [attrition]                 attrition checks                     balance, attrition
  [[table]]                   tables for the report                Top level
  [rehearsal]                 simulated data for `rehearse`:       Rehearsal
                              power, MDE, rule firing rates

Missing values in data files: an empty field, NA or . (Data tables).
Names in expressions that are not identifiers go between backticks: `floor area`.
Start from your data with `sworn init DATA… --out plan.toml`; the places only your
team can decide are marked \"<fill: …>\" and `sworn check` names any left unfilled.";

/// Print help for `topic`: none (the command list), `plan`, or a command name.
pub fn help(topic: Option<&str>) -> Result<()> {
    let mut cli = Cli::command();
    match topic {
        None => print(cli.render_long_help()),
        Some("plan") => println!("{PLAN_PAGE}"),
        Some(name) => match cli.find_subcommand_mut(name) {
            Some(sub) => {
                let mut sub = sub.clone().bin_name(format!("sworn {name}"));
                print(sub.render_long_help());
            }
            None => {
                let mut topics: Vec<String> = cli
                    .get_subcommands()
                    .map(|c| c.get_name().to_string())
                    .collect();
                topics.push("plan".into());
                let hint = crate::plan::suggest_hint(name, topics.iter().map(String::as_str));
                return Err(Error::Usage {
                    message: format!(
                        "there is no help topic `{}`; topics: {}{hint}",
                        name.chars().take(80).collect::<String>(),
                        topics.join(", ")
                    ),
                });
            }
        },
    }
    Ok(())
}

fn print(styled: clap::builder::StyledStr) {
    let text = if crate::terminal::colour_on_stdout() {
        styled.ansi().to_string()
    } else {
        styled.to_string()
    };
    println!("{}", text.trim_end());
}

/// Print the completion script for `shell` to standard output.
pub fn completions(shell: clap_complete::Shell) {
    let mut cli = Cli::command();
    clap_complete::generate(shell, &mut cli, "sworn", &mut std::io::stdout());
}
