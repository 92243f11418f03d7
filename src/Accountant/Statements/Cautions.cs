namespace Accountant.Statements;

/// <summary>The cautions every statement carries (DESIGN.md, "Cautions the statement carries").</summary>
public static class Cautions
{
    public static IReadOnlyList<string> All { get; } =
    [
        "The guarantees assume the holdout's examples are independent draws from the population the model will meet; grouped or time-ordered data, duplicates across splits, preprocessing fitted on the holdout, and looks that were never recorded all void them.",
        "Adaptivity beyond what was declared voids the union bound: a configuration chosen after seeing holdout scores must be recorded as an adaptive look.",
        "Distribution shift is a separate problem that no holdout correction fixes.",
        "A corrected validation score does not replace one untouched test set, opened once, for the final number.",
        "Where a model's errors can hurt people (credit, health, safety, employment), these figures are no substitute for the domain's own validation rules, its regulators and licensed professional judgement.",
    ];
}
