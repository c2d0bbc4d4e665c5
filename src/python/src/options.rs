//! Keyword arguments as command-line flags: each name is a long flag of the subcommand with
//! underscores for hyphens (`--z-column` is `z_column`), each value its text, and the
//! command line's parser reads them, so values are checked and refused with the command
//! line's messages.

use clap::{ArgAction, CommandFactory, FromArgMatches};
use pyo3::exceptions::{PyTypeError, PyValueError};
use pyo3::prelude::*;
use pyo3::types::{PyBool, PyDict, PyList, PyTuple};

/// The keyword name of a flag: its long name with underscores for hyphens.
pub fn keyword(arg: &clap::Arg) -> Option<String> {
    arg.get_long().map(|l| l.replace('-', "_"))
}

/// The keyword names a call accepts (not `skip`), sorted; with `headings`, only those of
/// flags under one of these help headings.
pub fn names<P: CommandFactory>(skip: &[&str], headings: Option<&[&str]>) -> Vec<String> {
    let mut v: Vec<String> = P::command()
        .get_arguments()
        .filter(|a| match headings {
            None => true,
            Some(h) => a.get_help_heading().is_some_and(|x| h.contains(&x)),
        })
        .filter_map(keyword)
        .filter(|k| !skip.contains(&k.as_str()))
        .collect();
    v.sort();
    v
}

/// Parse `kwargs` with parser `P` as the command line would parse the flags they name;
/// `function` names the Python function in messages. Returns the parsed flags and the
/// flags as typed (for the record).
pub fn parse<P: CommandFactory + FromArgMatches>(
    function: &str,
    kwargs: Option<&Bound<'_, PyDict>>,
    skip: &[&str],
    extra: Vec<String>,
) -> PyResult<(P, Vec<String>)> {
    let command = P::command();
    let mut argv = extra;
    let mut unknown = vec![];
    if let Some(kwargs) = kwargs {
        for (key, value) in kwargs.iter() {
            let key: String = key.extract()?;
            let arg = command
                .get_arguments()
                .find(|a| keyword(a).as_deref() == Some(key.as_str()))
                .filter(|_| !skip.contains(&key.as_str()));
            let Some(arg) = arg else {
                unknown.push(key);
                continue;
            };
            let long = arg.get_long().unwrap_or_default();
            if value.is_none() {
                continue;
            }
            if matches!(arg.get_action(), ArgAction::SetTrue) {
                let Ok(on) = value.cast::<PyBool>().map(|b| b.is_true()) else {
                    return Err(PyValueError::new_err(format!(
                        "{function}(): {key} is a switch: give True or False"
                    )));
                };
                if on {
                    argv.push(format!("--{long}"));
                }
                continue;
            }
            argv.push(format!("--{long}={}", text_of(&value)?));
        }
    }
    if !unknown.is_empty() {
        unknown.sort();
        return Err(PyTypeError::new_err(format!(
            "{function}() got unexpected keyword argument{} {}; its options are the flags of the command line with underscores: {}",
            if unknown.len() == 1 { "" } else { "s" },
            unknown.iter().map(|k| format!("'{k}'")).collect::<Vec<_>>().join(", "),
            names::<P>(skip, None).join(", ")
        )));
    }
    let matches = command
        .no_binary_name(true)
        .try_get_matches_from(&argv)
        .map_err(|e| PyValueError::new_err(clap_message(function, &e)))?;
    let parsed = P::from_arg_matches(&matches)
        .map_err(|e| PyValueError::new_err(clap_message(function, &e)))?;
    Ok((parsed, argv))
}

/// A value as the command line would type it: text as it is, numbers by Python's `str`
/// (which gives back the same float), a list or tuple comma-separated.
fn text_of(value: &Bound<'_, PyAny>) -> PyResult<String> {
    if value.cast::<PyList>().is_ok() || value.cast::<PyTuple>().is_ok() {
        let parts: PyResult<Vec<String>> = value.try_iter()?.map(|v| text_of(&v?)).collect();
        return Ok(parts?.join(","));
    }
    Ok(value.str()?.to_string())
}

/// clap's message without its usage lines: what the command line says is wrong.
fn clap_message(function: &str, e: &clap::Error) -> String {
    let text = e.to_string();
    let first = text
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .take_while(|l| !l.starts_with("Usage:") && !l.starts_with("For more information"))
        .collect::<Vec<_>>()
        .join(" ");
    format!("{function}(): {}", first.trim_start_matches("error: "))
}
