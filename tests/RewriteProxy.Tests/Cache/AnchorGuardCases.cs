using RewriteProxy.Cache;

namespace RewriteProxy.Tests.Cache;

/// <summary>
/// Labelled question pairs of our own invented scenarios (a wind farm's maintenance manual, a hospital's visiting
/// rules, a bike-share handbook, a city water utility, a library, a ferry line, a swimming pool, a school office).
/// A paraphrase (Reason null) must pass the guard; a near-miss must be refused for the reason given. Shared by the
/// table test and the similarity measurement.
/// </summary>
public static class AnchorGuardCases
{
    public sealed record Pair(string Asked, string Cached, AnchorReason? Reason, bool OffTopic = false)
    {
        public bool IsParaphrase => Reason is null && !OffTopic;
        public override string ToString() => $"{Asked} | {Cached}";
    }

    public static readonly IReadOnlyList<Pair> All =
    [
        // ---- paraphrases: must agree ----
        new("What is the inspection interval for blade bolts?", "How often should blade bolts be inspected?", null),
        new("When does visiting time start on the maternity ward?", "What time do visiting hours begin on the maternity ward?", null),
        new("How much does a bike share day pass cost?", "What is the price of a day pass for the bike share?", null),
        new("Can I bring 5 guests to the pool?", "Am I allowed to bring five guests to the pool?", null),
        new("How long can I rent a bike for 1,000 points?", "How long can a bike be rented for one thousand points?", null),
        new("Is the tap water in Eastbrook safe to drink?", "Can residents of Eastbrook drink the tap water safely?", null),
        new("What are the opening hours of the Riverside library on Saturday?", "When is Riverside library open on Saturdays?", null),
        new("How do I report a burst water main?", "What is the procedure for reporting a burst water main?", null),
        new("Are dogs allowed in the visitor garden?", "Can I bring my dog into the visitor garden?", null),
        new("What is the maximum load of the XR-200 hoist?", "How much can the XR200 hoist lift at most?", null),
        new("What does error code E42 mean on the water meter?", "What is the meaning of the E42 error on a water meter?", null),
        new("How can I renew my library card online?", "Is there a way to renew a library card on the website?", null),
        new("Which gate does the 7:45 ferry to Port Ellis leave from?", "From which gate does the 7:45 ferry to Port Ellis depart?", null),
        new("Where can I park my bike overnight?", "Where is overnight bike parking available?", null),
        new("How long does it take to get a permit for a street party?", "What is the processing time for a street party permit?", null),
        new("Do I need an appointment to donate blood at the clinic?", "Is an appointment required for blood donation at the clinic?", null),
        new("What is the fine for returning a book 3 days late?", "How much is the penalty when a book comes back three days late?", null),
        new("How much does it cost to send a 20 kg parcel?", "What is the postage for a parcel of 20 kilograms?", null),
        new("Can patients in the ICU receive flowers?", "Are flowers permitted for ICU patients?", null),
        new("Is there a discount for students at the swimming pool?", "Do students get a reduced price at the swimming pool?", null),
        new("What happens if I don't return the bike within 30 minutes?", "What if the bike isn't returned within 30 min?", null),
        new("How often is the reservoir water tested for lead?", "What is the testing frequency for lead in reservoir water?", null),
        new("When is the deadline to enrol for the autumn term?", "By what date must I enrol for the autumn term?", null),
        new("Why is my water pressure low in the morning?", "What causes low water pressure in the mornings?", null),
        new("Can I take a folding bike on the ferry?", "Are folding bikes allowed on board the ferry?", null),
        new("How do I reset the password for the visitor Wi-Fi?", "What is the way to reset the visitor Wi-Fi password?", null),
        new("What is the minimum age to rent an e-bike?", "How old must I be to rent an e-bike?", null),
        new("Is the pool open on public holidays?", "Does the pool open on public holidays?", null),
        new("How much does a replacement card cost if I lose mine?", "What is the fee for a new card if I lose my card?", null),
        new("What is the temperature of the hydrotherapy pool?", "How warm is the water in the hydrotherapy pool?", null),
        new("Which one of the lifts goes to the 3rd floor?", "Which lift goes to the third floor?", null),
        new("Is the gearbox oil changed every 12 months?", "Does the gearbox oil get changed every twelve months?", null),
        new("Is the firmware v2.3 compatible with the smart meter?", "Does firmware version 2.3 work with the smart meter?", null),
        new("Does the bike share charge $5 for a lost helmet?", "Is the charge for a lost helmet 5 dollars?", null),

        // ---- near-misses: must be refused, for the reason given ----
        new("What was the wind farm's total energy output in 2022?", "What was the wind farm's total energy output in 2023?", AnchorReason.Number),
        new("Is the gearbox covered by the warranty?", "Is the gearbox not covered by the warranty?", AnchorReason.Negation),
        new("How much does it cost to send a 5 kg parcel?", "How much does it cost to send a 5 lb parcel?", AnchorReason.Unit),
        new("Can I bring five guests to the pool?", "Can I bring six guests to the pool?", AnchorReason.Number),
        new("Are dogs permitted in the visitor garden?", "Are dogs forbidden in the visitor garden?", AnchorReason.Contrast),
        new("What is the maximum load of the XR-200 hoist?", "What is the minimum load of the XR-200 hoist?", AnchorReason.Contrast),
        new("What is the maximum load of the XR-200 hoist?", "What is the maximum load of the XR-300 hoist?", AnchorReason.Identifier),
        new("Are helmets included in the bike rental price?", "Are helmets excluded from the bike rental price?", AnchorReason.Contrast),
        new("Which gate does the 7:45 ferry leave from?", "Which gate does the 8:45 ferry leave from?", AnchorReason.Number),
        new("When does the library open on Saturday?", "When does the library close on Saturday?", AnchorReason.Contrast),
        new("When does the library open on Saturday?", "When does the library open on Sunday?", AnchorReason.Identifier),
        new("Is the water pressure higher in the morning?", "Is the water pressure lower in the morning?", AnchorReason.Contrast),
        new("What happens if I return the bike before 6 pm?", "What happens if I return the bike after 6 pm?", AnchorReason.Contrast),
        new("How much is the late fee for 3 days?", "How much is the late fee for 3 weeks?", AnchorReason.Unit),
        new("What does error code E42 mean on the water meter?", "What does error code E24 mean on the water meter?", AnchorReason.Identifier),
        new("Can visitors use the lift in the east wing?", "Can visitors use the lift in the west wing?", AnchorReason.Contrast),
        new("Does the bike app work on iPhone 15?", "Does the bike app work on iPhone 14?", AnchorReason.Number),
        new("Is firmware v2.3 compatible with the smart meter?", "Is firmware v2.4 compatible with the smart meter?", AnchorReason.Number),
        new("Is the student discount 10% at the pool?", "Is the student discount 10 euros at the pool?", AnchorReason.Unit),
        new("Can I pay the water bill with a credit card?", "Can I pay the water bill without a credit card?", AnchorReason.Negation),
        new("Is the first floor of the clinic wheelchair accessible?", "Is the third floor of the clinic wheelchair accessible?", AnchorReason.Number),
        new("Is parking free for valid blue badge holders?", "Is parking free for invalid blue badge holders?", AnchorReason.Contrast),
        new("Will the pool increase its prices in summer?", "Will the pool decrease its prices in summer?", AnchorReason.Contrast),
        new("Are the changing rooms inside the sports hall?", "Are the changing rooms outside the sports hall?", AnchorReason.Contrast),
        new("Can I enrol my child who isn't vaccinated?", "Can I enrol my child who is vaccinated?", AnchorReason.Negation),
        new("What does the \"Leak alert\" message on the meter mean?", "What does the \"Low battery\" message on the meter mean?", AnchorReason.Identifier),
        new("How many bikes does the Harbour Street station hold?", "How many bikes does the Mill Street station hold?", AnchorReason.Identifier),
        new("Should the blade bolts be torqued to 350 Nm?", "Should the blade bolts be torqued to 400 Nm?", AnchorReason.Number),
        new("How much does it cost to hire the school hall for two hours?", "How much does it cost to hire the school hall for twelve hours?", AnchorReason.Number),
        new("Does the hospital allow visitors during the night?", "Does the hospital allow visitors during the day?", AnchorReason.Contrast),
        new("Do the blade bolts need replacing after 5,000 hours?", "Do the blade bolts need replacing after 50,000 hours?", AnchorReason.Number),
        new("Is the children's pool deeper than 1.2 m?", "Is the children's pool shallower than 1.2 m?", AnchorReason.Contrast),
        new("Does the warranty cover the gearbox for 2 years?", "Does the warranty cover the gearbox for 2 months?", AnchorReason.Unit),
        new("Is the tap water safe to drink during the boil notice?", "Is the tap water unsafe to drink during the boil notice?", AnchorReason.Contrast),
        new("Did the Riverside team win the library quiz?", "Did the Riverside team lose the library quiz?", AnchorReason.Contrast),
        new("Is the ferry to Port Ellis never late?", "Is the ferry to Port Ellis ever late?", AnchorReason.Negation),
        new("Does the ward allow two visitors per patient?", "Does the ward allow no visitors per patient?", AnchorReason.Negation),
        new("Is the turbine shut down above 25 m/s wind speed?", "Is the turbine shut down below 25 m/s wind speed?", AnchorReason.Contrast),
    ];

    /// <summary>
    /// Different questions whose anchors agree: only similarity can stop them, so they are measured, not guarded
    /// (the guard is no topic check). They bound how low HitSimilarity may go.
    /// </summary>
    public static readonly IReadOnlyList<Pair> OffTopic =
    [
        new("Where can I park my bike overnight?", "Where can I park my car overnight?", null, true),
        new("How do I renew my library card?", "How do I cancel my library card?", null, true),
        new("Can visitors bring flowers to the ICU?", "Can visitors bring food to the ICU?", null, true),
        new("How often should blade bolts be inspected?", "How often should blade bearings be greased?", null, true),
        new("Who do I call about a burst water main?", "Who do I call about a blocked sewer?", null, true),
        new("Is the swimming pool heated?", "Is the swimming pool chlorinated?", null, true),
        new("What is the late fee for library books?", "What is the late fee for library DVDs on loan?", null, true),
        new("When does the ferry to Port Ellis leave?", "How long does the ferry to Port Ellis take?", null, true),
        new("Can I rent a bike with a debit card?", "Can I rent a bike with a cash deposit?", null, true),
        new("Where is the hospital's main car park?", "Where is the hospital's main pharmacy?", null, true),
    ];

    public static IEnumerable<object[]> Paraphrases() => All.Where(p => p.IsParaphrase).Select(p => new object[] { p.Asked, p.Cached });

    public static IEnumerable<object[]> NearMisses() => All.Where(p => !p.IsParaphrase).Select(p => new object[] { p.Asked, p.Cached, p.Reason! });
}
