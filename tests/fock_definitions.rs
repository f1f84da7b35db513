//! With --fock, the definitions of f_pq and E_ref stand beside the results that use them, and
//! only those, in text, LaTeX and JSON; their summation letters are never letters the result
//! beside them uses.

use spinfold::{DEFAULT_SEED, Format, Options, derive_checked, parse, render};

/// The occupied index k is free in the first two results; the first uses E_ref and f, the
/// second f alone, the third E_ref alone, the fourth neither.
const INPUT: &str = "space occ: i k\nspace vir: a\ndet ref = | occ^2 |\n\
                     energy ref[k -> a]\nelement ref ref[k -> a]\nenergy ref\noverlap ref ref[k -> a]\n";

fn fock(input: &str, format: Format) -> String {
    let program = parse("legend.spinfold", input).expect("parses");
    let options = Options { fock: true, ..Options::default() };
    let derived = derive_checked(&program, &options, Some(DEFAULT_SEED)).expect("derives and verifies");
    render(&program, &derived, format).expect("renders")
}

/// The text block of each request, split at the blank lines between them.
fn blocks(text: &str) -> Vec<&str> {
    text.split("\n\n").collect()
}

/// The `with …` line of a text block, if it has one.
fn legend(block: &str) -> Option<&str> {
    block.lines().map(str::trim).find(|l| l.starts_with("with "))
}

#[test]
fn text_defines_what_each_result_uses_over_letters_it_does_not_use() {
    let text = fock(INPUT, Format::Text { ascii: false });
    let blocks = blocks(&text);
    assert!(blocks[0].contains("= E_ref − f_kk + f_aa − J_ka + K_ka"), "{text}");
    // k is free: the sums of the definitions run over l and m
    assert_eq!(
        legend(blocks[0]),
        Some(
            "with f_pq = h_pq + Σ_{l∈occ} (2 (pq|ll) − (pl|lq)) and E_ref = 2 Σ_{l∈occ} h_ll + Σ_{l,m∈occ} (2 J_lm − K_lm)"
        ),
        "{text}"
    );
    assert!(blocks[1].contains("= f_ka"), "{text}");
    assert_eq!(legend(blocks[1]), Some("with f_pq = h_pq + Σ_{l∈occ} (2 (pq|ll) − (pl|lq))"), "{text}");
    assert!(blocks[2].contains("= E_ref\n"), "{text}");
    assert_eq!(
        legend(blocks[2]),
        Some("with E_ref = 2 Σ_{k∈occ} h_kk + Σ_{k,l∈occ} (2 J_kl − K_kl)"),
        "{text}"
    );
    assert!(blocks[3].contains("= 0"), "{text}");
    assert_eq!(legend(blocks[3]), None, "{text}");
}

#[test]
fn text_in_ascii_and_over_several_closed_spaces() {
    // k is free here too
    let input =
        "space core\nspace occ: i k\nspace vir: a\ndet ref = | core^2 occ^2 |\nelement ref ref[k -> a]\n";
    let text = fock(input, Format::Text { ascii: true });
    assert_eq!(
        legend(&text),
        Some("with f_pq = h_pq + sum_{l in core + occ} (2 (pq|ll) - (pl|lq))"),
        "{text}"
    );
}

#[test]
fn a_letter_the_input_declares_for_something_else_is_not_summed_over() {
    // k names an orbital outside the closed space, unused in this result
    let text = fock("orbitals k a\nspace core\nenergy | core^2 a |\n", Format::Text { ascii: true });
    assert!(text.contains("= E_ref + f_aa"), "{text}");
    assert_eq!(
        legend(&text),
        Some(
            "with f_pq = h_pq + sum_{l in core} (2 (pq|ll) - (pl|lq)) and E_ref = 2 sum_{l in core} h_ll + sum_{l,m in core} (2 J_lm - K_lm)"
        ),
        "{text}"
    );
}

#[test]
fn latex_defines_each_symbol_once_where_it_first_appears() {
    let tex = fock(INPUT, Format::Latex { standalone: false });
    let environments: Vec<&str> = tex.split("\\end{align*}").collect();
    let f = r"f_{pq} &= h_{pq} + \sum_{l \in \mathrm{occ}} \bigl( 2 (pq\vert ll) - (pl\vert lq) \bigr)";
    let e = r"E_{\mathrm{ref}} &= 2 \sum_{l \in \mathrm{occ}} h_{ll} + \sum_{l,m \in \mathrm{occ}} \bigl( 2 J_{lm} - K_{lm} \bigr)";
    assert!(environments[0].contains(f) && environments[0].contains(e), "{tex}");
    assert_eq!(tex.matches(r"f_{pq} &=").count(), 1, "f is defined once:\n{tex}");
    assert_eq!(tex.matches(r"E_{\mathrm{ref}} &=").count(), 1, "E_ref is defined once:\n{tex}");
    // the first result to use E_ref comes after the first to use f: each is defined there
    let reordered = "space occ: i k\nspace vir: a\ndet ref = | occ^2 |\n\
                     element ref ref[k -> a]\nenergy ref\n";
    let tex = fock(reordered, Format::Latex { standalone: false });
    let environments: Vec<&str> = tex.split("\\end{align*}").collect();
    assert!(
        environments[0].contains(r"f_{pq} &=") && !environments[0].contains(r"E_{\mathrm{ref}} &="),
        "{tex}"
    );
    assert!(
        environments[1].contains(r"E_{\mathrm{ref}} &=") && !environments[1].contains(r"f_{pq} &="),
        "{tex}"
    );
}

#[test]
fn json_carries_the_definitions_each_result_uses() {
    let json: serde_json::Value = serde_json::from_str(&fock(INPUT, Format::Json)).expect("JSON");
    let definitions = |k: usize| json["requests"][k].get("definitions").cloned();
    assert_eq!(
        definitions(0),
        Some(serde_json::json!({
            "fock": "f_pq = h_pq + Σ_{l∈occ} (2 (pq|ll) − (pl|lq))",
            "reference_energy": "E_ref = 2 Σ_{l∈occ} h_ll + Σ_{l,m∈occ} (2 J_lm − K_lm)"
        }))
    );
    assert_eq!(
        definitions(1),
        Some(serde_json::json!({"fock": "f_pq = h_pq + Σ_{l∈occ} (2 (pq|ll) − (pl|lq))"}))
    );
    assert_eq!(
        definitions(2),
        Some(
            serde_json::json!({"reference_energy": "E_ref = 2 Σ_{k∈occ} h_kk + Σ_{k,l∈occ} (2 J_kl − K_kl)"})
        )
    );
    assert_eq!(definitions(3), None, "no field where nothing is defined");
}
