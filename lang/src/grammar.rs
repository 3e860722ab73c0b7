//! The pest parser generated from `grammar.pest`.

#[derive(pest_derive::Parser)]
#[grammar = "grammar.pest"]
pub struct IcefieldParser;

/// How a grammar rule is named in "expected ..." messages.
pub fn describe(rule: Rule) -> &'static str {
    match rule {
        Rule::ident | Rule::expr_name => "a name",
        Rule::number | Rule::quantity | Rule::expr_number => "a number",
        Rule::unit => "a unit",
        Rule::string | Rule::string_inner => "a quoted text",
        Rule::list => "a list `[...]`",
        Rule::directed | Rule::value => "a value",
        Rule::option | Rule::options => "an option `name = value`",
        Rule::column_ref => "a column such as `thermo.energy`",
        Rule::expr | Rule::expr_term | Rule::expr_call | Rule::expr_paren => "an expression",
        Rule::expr_neg => "`-`",
        Rule::expr_op => "an operator",
        Rule::kw_lattice => "`lattice`",
        Rule::kw_couplings => "`couplings`",
        Rule::kw_field => "`field`",
        Rule::kw_seed => "`seed`",
        Rule::kw_measure => "`measure`",
        Rule::kw_scan => "`scan`",
        Rule::kw_table => "`table`",
        Rule::kw_show => "`show`",
        Rule::kw_plot => "`plot`",
        Rule::kw_column => "`column`",
        Rule::kw_rhai => "`rhai`",
        Rule::kw_export => "`export`",
        Rule::word_from | Rule::range_from_to => "`from`",
        Rule::word_to => "`to`",
        Rule::word_in => "`in`",
        Rule::word_steps => "`steps`",
        Rule::word_at | Rule::range_at => "`at`",
        Rule::word_against => "`against`",
        Rule::word_unit => "`unit`",
        Rule::word_along => "`along`",
        Rule::word_for => "`for`",
        Rule::word_with => "`with`",
        Rule::word_over => "`over`",
        Rule::word_through => "`through`",
        Rule::word_on => "`on`",
        Rule::word_of => "`of`",
        Rule::word_by => "`by`",
        Rule::word_within => "`within`",
        Rule::connective => "a connecting word (`for`, `at`, `with`, ...)",
        Rule::dotted_ref => "a column such as `thermo.energy`",
        Rule::command_arg => "a value or a connecting word",
        Rule::kw_command => "a statement keyword",
        Rule::rhai_body => "rhai code",
        Rule::EOI => "the end of the statement",
        _ => "a statement",
    }
}
