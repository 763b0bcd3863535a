//! The target's task and, for a class target, its classes: inference of the
//! task when `[data] task` is absent, the class order (the sorted labels:
//! numerically when every label is a number, as text otherwise), the
//! positive class of a binary target, and the labels encoded as class
//! indices (docs/spec.md, "Task and classes").

use crate::spec::Task;

/// Most distinct values of a whole-number target that is inferred to hold
/// class labels; more make it a numeric target.
pub(crate) const INFER_MAX_CLASSES: usize = 10;

/// Most classes a class target may have (docs/spec.md, "Limits").
pub(crate) const MAX_CLASSES: usize = 1_000;

/// The task of a plan and how it was decided.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct TaskInfo {
    pub(crate) task: Task,
    /// Why the task was inferred; `None` when the spec declared it.
    pub(crate) inferred: Option<String>,
    /// Whether the inference is worth a note on the terminal: always for
    /// classes, and for numbers that could have been read as classes.
    pub(crate) noteworthy: bool,
    /// The classes of a class target.
    pub(crate) classes: Option<Classes>,
}

impl TaskInfo {
    /// A declared regression target.
    pub(crate) fn regression(inferred: Option<String>) -> Self {
        TaskInfo {
            task: Task::Regression,
            inferred,
            noteworthy: false,
            classes: None,
        }
    }

    /// Numbers per predicted row: 1, or the class probabilities and the
    /// predicted class.
    pub(crate) fn prediction_width(&self) -> usize {
        self.classes.as_ref().map_or(1, |c| c.labels.len() + 1)
    }

    /// The number of classes, 0 for a numeric target.
    pub(crate) fn class_count(&self) -> usize {
        self.classes.as_ref().map_or(0, |c| c.labels.len())
    }
}

/// The classes of a class target.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Classes {
    /// The labels in class order.
    pub(crate) labels: Vec<String>,
    /// Index of the positive class (binary targets: the second label unless
    /// `[data] positive` names another; 1 otherwise, unused).
    pub(crate) positive: usize,
}

/// How a numeric target looks to the inference: `Some(distinct)` when every
/// value is a whole number, with how many distinct values there are (counting
/// stops past [`INFER_MAX_CLASSES`]).
pub(crate) fn whole_number_levels(values: &[f64]) -> Option<usize> {
    let mut seen: Vec<f64> = Vec::new();
    for &v in values {
        if v.fract() != 0.0 {
            return None;
        }
        if !seen.contains(&v) {
            seen.push(v);
            if seen.len() > INFER_MAX_CLASSES {
                return Some(seen.len());
            }
        }
    }
    Some(seen.len())
}

/// Why a numeric target is (or is not) read as classes; `Some(reason)` for
/// classes.
pub(crate) fn infer_from_numbers(values: &[f64]) -> (Task, String) {
    match whole_number_levels(values) {
        Some(levels) if levels <= INFER_MAX_CLASSES => (
            Task::Classification,
            format!(
                "the target holds whole numbers with {levels} distinct values \
                 (at most {INFER_MAX_CLASSES} are read as class labels)"
            ),
        ),
        Some(_) => (
            Task::Regression,
            format!("the target holds numbers with more than {INFER_MAX_CLASSES} distinct values"),
        ),
        None => (
            Task::Regression,
            "the target holds numbers that are not all whole".to_string(),
        ),
    }
}

/// What is wrong with a class target: the spec key concerned, if any, and
/// the message.
pub(crate) type TargetProblem = (Option<&'static str>, String);

/// The text label of a numeric class value (shortest round-trip form).
pub(crate) fn number_label(value: f64) -> String {
    format!("{value}")
}

/// The classes of `labels` and every row's class index. `positive` is the
/// `[data] positive` label. Errors are messages for the caller to place.
pub(crate) fn encode(
    labels: &[String],
    positive: Option<&str>,
) -> Result<(Classes, Vec<f64>), TargetProblem> {
    let order = crate::split::ordered_labels(labels.iter().map(String::as_str));
    if order.len() < 2 {
        return Err((
            None,
            format!(
                "the target holds a single class (\"{}\"); classification needs at least two",
                order.first().map(String::as_str).unwrap_or_default()
            ),
        ));
    }
    if order.len() > MAX_CLASSES {
        return Err((
            None,
            format!(
                "the target holds {} distinct labels, more than the {MAX_CLASSES} classes \
                 heldout accepts; is it a numeric target with a stray text cell? \
                 (set `task = \"regression\"` in [data] to have it read as numbers)",
                order.len()
            ),
        ));
    }
    let positive = match positive {
        None => 1,
        Some(wanted) => {
            if order.len() != 2 {
                return Err((
                    Some("data.positive"),
                    format!(
                        "names the positive class of a binary target; this target has {} \
                         classes ({})",
                        order.len(),
                        shown(&order)
                    ),
                ));
            }
            order.iter().position(|l| l == wanted).ok_or_else(|| {
                (
                    Some("data.positive"),
                    format!(
                        "\"{wanted}\" is not among the target's labels ({})",
                        shown(&order)
                    ),
                )
            })?
        }
    };
    let index: std::collections::BTreeMap<&str, usize> = order
        .iter()
        .enumerate()
        .map(|(i, l)| (l.as_str(), i))
        .collect();
    let encoded = labels.iter().map(|l| index[l.as_str()] as f64).collect();
    Ok((
        Classes {
            labels: order,
            positive,
        },
        encoded,
    ))
}

fn shown(labels: &[String]) -> String {
    let quoted: Vec<String> = labels.iter().take(10).map(|l| format!("\"{l}\"")).collect();
    let more = labels.len().saturating_sub(10);
    if more > 0 {
        format!("{} and {more} more", quoted.join(", "))
    } else {
        quoted.join(", ")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn strings(values: &[&str]) -> Vec<String> {
        values.iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn class_order_is_sorted_labels_and_positive_the_second() {
        let (classes, encoded) = encode(&strings(&["yes", "no", "yes"]), None).unwrap();
        assert_eq!(classes.labels, strings(&["no", "yes"]));
        assert_eq!(classes.positive, 1);
        assert_eq!(encoded, vec![1.0, 0.0, 1.0]);
        // Numbers sort as numbers: 2 before 10.
        let (classes, _) = encode(&strings(&["10", "2", "2"]), None).unwrap();
        assert_eq!(classes.labels, strings(&["2", "10"]));
    }

    #[test]
    fn positive_must_be_a_label_of_a_binary_target() {
        let labels = strings(&["no", "yes"]);
        assert_eq!(encode(&labels, Some("no")).unwrap().0.positive, 0);
        let (key, message) = encode(&labels, Some("maybe")).unwrap_err();
        assert_eq!(key, Some("data.positive"));
        assert!(message.contains("\"maybe\" is not among"), "{message}");
        let three = strings(&["a", "b", "c"]);
        assert!(encode(&three, Some("a"))
            .unwrap_err()
            .1
            .contains("3 classes"));
        assert!(encode(&strings(&["a", "a"]), None)
            .unwrap_err()
            .1
            .contains("single class"));
    }

    #[test]
    fn few_whole_numbers_are_classes_and_measurements_are_not() {
        assert_eq!(
            infer_from_numbers(&[0.0, 1.0, 1.0, 0.0]).0,
            Task::Classification
        );
        assert_eq!(infer_from_numbers(&[0.5, 1.0]).0, Task::Regression);
        let many: Vec<f64> = (0..11).map(f64::from).collect();
        assert_eq!(infer_from_numbers(&many).0, Task::Regression);
        let ten: Vec<f64> = (0..10).map(f64::from).collect();
        assert_eq!(infer_from_numbers(&ten).0, Task::Classification);
    }
}
