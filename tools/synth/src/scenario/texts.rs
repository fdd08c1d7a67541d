//! Short invented post texts from templates by stance; a share comes from another stance's
//! templates, so the text alone is not a perfect label.

use rand::Rng;
use rand_chacha::ChaCha8Rng;

use super::digits::push_zero_padded;

/// Share of texts drawn from any stance's templates, so text alone is not a perfect label.
const OFF_STANCE_TEXT_SHARE: f64 = 0.15;

/// (text before the number, text after it), by true stance.
const OPPOSE_TEMPLATES: [(&str, &str); 7] = [
    ("The levy adds ", " a month to my bill. Vote no."),
    ("Day ", " of asking who actually gains from the wind levy."),
    ("", " turbines on the horizon and we pay for them? Oppose."),
    (
        "Fishing grounds lost, levy up ",
        " percent. Not in our name.",
    ),
    ("Meeting #", ": the levy is a tax on the coast. Against."),
    ("Scrap the offshore levy. Signature ", "."),
    ("I count ", " reasons to reject the wind levy."),
];
const NEUTRAL_TEMPLATES: [(&str, &str); 6] = [
    ("Public hearing on the wind-farm levy, session ", "."),
    ("Read the levy proposal up to page ", ". Still undecided."),
    ("Question ", " for the council: how is the levy collected?"),
    ("Ferry late by ", " min, levy debate on the radio."),
    ("Poll ", ": has anyone costed the levy both ways?"),
    ("Levy explainer part ", " is out."),
];
const SUPPORT_TEMPLATES: [(&str, &str); 7] = [
    ("Back the levy: ", " local jobs at the new harbour yard."),
    ("Clean power for ", " thousand homes. Yes to the levy!"),
    ("The wind levy pays back in ", " years. Worth it."),
    ("Proud to back the offshore levy, day ", "."),
    ("", " of us marched for the wind levy today."),
    ("Turbines over tankers. Levy yes, pledge ", "."),
    ("Our kids get ", " years of cleaner air. Support the levy."),
];

/// A post text for a record of true `stance`, with a number from 1 to 99 in it.
pub fn draw_text(rng: &mut ChaCha8Rng, stance: i8) -> String {
    let text_stance = if rng.random::<f64>() < OFF_STANCE_TEXT_SHARE {
        rng.random_range(-1_i8..=1)
    } else {
        stance
    };
    let templates: &[(&str, &str)] = match text_stance {
        -1 => &OPPOSE_TEMPLATES,
        0 => &NEUTRAL_TEMPLATES,
        _ => &SUPPORT_TEMPLATES,
    };
    let (before, after) = templates[rng.random_range(0..templates.len())];
    let number: u32 = rng.random_range(1..=99);
    // Exact capacity: `format!` would reserve twice the literal length, which at
    // ten million records is hundreds of megabytes of slack.
    let mut text = String::with_capacity(before.len() + 2 + after.len());
    text.push_str(before);
    push_zero_padded(&mut text, u64::from(number), 1);
    text.push_str(after);
    text
}
