//! Question tokens in, answer out: tokenising questions, turning scores into probabilities and
//! ranked answers, and normalising answer strings so "Two", "two" and "2" compare equal.

use serde::{Deserialize, Serialize};

use super::manifest::{Activation, QuestionInput};

/// How answers (model labels, expectations, ground truth) are normalised before comparing.
#[derive(Debug, Clone, PartialEq, Eq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct AnswerNormalisation {
    /// Compare case-insensitively.
    #[serde(default = "yes")]
    pub lowercase: bool,
    /// Map number words "zero" to "twenty" to digits.
    #[serde(default = "yes")]
    pub number_words: bool,
}

fn yes() -> bool {
    true
}

impl Default for AnswerNormalisation {
    fn default() -> Self {
        AnswerNormalisation {
            lowercase: true,
            number_words: true,
        }
    }
}

const NUMBER_WORDS: [&str; 21] = [
    "zero",
    "one",
    "two",
    "three",
    "four",
    "five",
    "six",
    "seven",
    "eight",
    "nine",
    "ten",
    "eleven",
    "twelve",
    "thirteen",
    "fourteen",
    "fifteen",
    "sixteen",
    "seventeen",
    "eighteen",
    "nineteen",
    "twenty",
];

impl AnswerNormalisation {
    /// Trims white space and trailing full stops, then applies case folding and number words.
    pub fn normalise(&self, answer: &str) -> String {
        let mut s = answer.trim().trim_end_matches('.').trim().to_string();
        if self.lowercase {
            s = s.to_lowercase();
        }
        if self.number_words {
            if let Some(n) = NUMBER_WORDS.iter().position(|w| w.eq_ignore_ascii_case(&s)) {
                s = n.to_string();
            }
        }
        s
    }
}

/// Word ids for a question: optional lower-casing, every character that is not a letter, digit or
/// apostrophe becomes a space, white-space split, unknown words get `unknown_id`, then truncation or
/// padding with `pad_id` to `max_length`.
pub fn tokenise(question: &str, q: &QuestionInput) -> Vec<i64> {
    let text = if q.lowercase {
        question.to_lowercase()
    } else {
        question.to_string()
    };
    let cleaned: String = text
        .chars()
        .map(|c| {
            if c.is_alphanumeric() || c == '\'' {
                c
            } else {
                ' '
            }
        })
        .collect();
    let mut ids: Vec<i64> = cleaned
        .split_whitespace()
        .map(|w| q.vocabulary.get(w).copied().unwrap_or(q.unknown_id))
        .take(q.max_length)
        .collect();
    ids.resize(q.max_length, q.pad_id);
    ids
}

/// Converts raw output scores into probabilities.
pub fn activate(scores: &[f32], activation: Activation) -> Vec<f32> {
    match activation {
        Activation::None => scores.to_vec(),
        Activation::Sigmoid => scores.iter().map(|&s| 1.0 / (1.0 + (-s).exp())).collect(),
        Activation::Softmax => {
            let max = scores.iter().copied().fold(f32::NEG_INFINITY, f32::max);
            let exps: Vec<f32> = scores.iter().map(|&s| (s - max).exp()).collect();
            let sum: f32 = exps.iter().sum();
            exps.iter().map(|e| e / sum).collect()
        }
    }
}

/// One answer and its probability.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Ranked {
    pub answer: String,
    pub probability: f32,
}

/// The model's answer on one image: the most probable label and the `top_k` ranking.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Prediction {
    pub answer: String,
    pub probability: f32,
    pub top_k: Vec<Ranked>,
}

/// Ranks labels by probability; ties keep label order, so the first-listed label wins (as argmax does).
pub fn rank(probabilities: &[f32], labels: &[String], top_k: usize) -> Prediction {
    let mut order: Vec<usize> = (0..probabilities.len()).collect();
    order.sort_by(|&a, &b| {
        probabilities[b]
            .total_cmp(&probabilities[a])
            .then(a.cmp(&b))
    });
    let top_k: Vec<Ranked> = order
        .iter()
        .take(top_k.max(1))
        .map(|&i| Ranked {
            answer: labels[i].clone(),
            probability: probabilities[i],
        })
        .collect();
    Prediction {
        answer: top_k[0].answer.clone(),
        probability: top_k[0].probability,
        top_k,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normalises_number_words_and_case() {
        let n = AnswerNormalisation::default();
        assert_eq!(n.normalise(" Two. "), "2");
        assert_eq!(n.normalise("Red"), "red");
        assert_eq!(n.normalise("12"), "12");
    }

    #[test]
    fn softmax_sums_to_one_and_keeps_order() {
        let p = activate(&[1.0, 3.0, 2.0], Activation::Softmax);
        assert!((p.iter().sum::<f32>() - 1.0).abs() < 1e-6);
        let labels: Vec<String> = ["a", "b", "c"].iter().map(|s| s.to_string()).collect();
        let r = rank(&p, &labels, 2);
        assert_eq!(r.answer, "b");
        assert_eq!(r.top_k[1].answer, "c");
    }
}
