namespace RewriteProxy.Cli.Demo;

/// <summary>A question asked again in other words, or changed in one detail that must keep it apart from the cached one.</summary>
/// <param name="Text">The question as a staff member types it.</param>
/// <param name="Kind">For a near-miss, what differs: year, amount, negation, identifier or opposite.</param>
/// <param name="From">The word(s) of the base question that the near-miss changes; the scripted answers change them too.</param>
/// <param name="To">What they become.</param>
public sealed record NearMiss(string Text, string Kind, string From, string To);

/// <summary>One question of the scenario with everything the scripted upstream and the workload need.</summary>
/// <param name="Question">Asked first, then repeated word for word (or with case and spacing changed).</param>
/// <param name="Paraphrases">The same question in other words: should be semantic hits.</param>
/// <param name="NearMiss">A question one detail away: must not be served from the cache.</param>
/// <param name="Draft">A hypothetical handbook passage that answers the question (the draft lane's answer).</param>
/// <param name="Siblings">Related questions a staff member might also ask (the siblings lane's answer).</param>
public sealed record ScenarioQuestion(string Question, string[] Paraphrases, NearMiss? NearMiss, string Draft, string[] Siblings);

/// <summary>
/// The demo's invented scenario: staff of Fenwick Valley Libraries, a fictional network of nine branches, ask an assistant
/// about their staff handbook. Every name, figure and rule here is made up.
/// </summary>
public static class DemoScenario
{
    public const string Title = "Fenwick Valley Libraries (fictional), staff handbook";

    public const string DraftSystemPrompt =
        "You help staff of Fenwick Valley Libraries search their staff handbook. Write one short paragraph that could be " +
        "the handbook passage answering the question. Do not mention that you are writing a hypothetical passage.";

    public const string SiblingsSystemPrompt =
        "You help staff of Fenwick Valley Libraries search their staff handbook. Write 5 related questions a staff member " +
        "might also ask, one per line, without numbering or any other text.";

    /// <summary>Drafts a model writes when it wanders off the question: the drift guard should drop them.</summary>
    public static readonly string[] OffTopicDrafts =
    [
        "The Fenwick Valley was settled by wool merchants in the fourteenth century, and the old market cross still stands " +
        "in the town square. Its stone bridge was rebuilt after the great flood, and the valley is known today for its " +
        "cider orchards and walking trails.",
        "A good sourdough starts with a lively starter fed twice a day. Mix flour, water and salt, fold the dough every half " +
        "hour, let it rise overnight in a cool place and bake it in a hot covered pot for a crisp crust.",
        "The regional football league had a dramatic season: the champions won their last six matches, while two clubs " +
        "were relegated on goal difference. Attendance rose for the third year running.",
        "Tomatoes grow best in full sun with regular watering. Pinch out the side shoots, tie the stems to canes and feed " +
        "the plants weekly once the first fruits have set.",
    ];

    /// <summary>Lines a siblings answer sometimes carries that have nothing to do with the question.</summary>
    public static readonly string[] OffTopicSiblings =
    [
        "What is the weather forecast for the weekend?",
        "Can you recommend a good thriller novel?",
        "How do I bake sourdough bread at home?",
        "Which football team won the league last season?",
        "Would you like me to suggest more questions?",
    ];

    /// <summary>Openers a model puts before its list although it was told not to.</summary>
    public static readonly string[] Preambles =
    [
        "Here are five related questions:",
        "Sure! Some questions a staff member might also ask:",
        "Related questions:",
    ];

    public static readonly ScenarioQuestion[] Questions =
    [
        new("How many days of annual leave does a full-time librarian get in 2025?",
            ["How many annual leave days does a full-time librarian get in 2025?",
             "In 2025, how many days of annual leave do full-time librarians get?"],
            new("How many days of annual leave does a full-time librarian get in 2026?", "year", "2025", "2026"),
            "In 2025 a full-time librarian at Fenwick Valley Libraries gets 27 days of annual leave, plus public holidays. " +
            "Annual leave is requested in the staff portal at least two weeks ahead, and up to five unused days of leave " +
            "carry over into the next year.",
            ["Can unused annual leave be carried over to next year?",
             "How do I request annual leave in the staff portal?",
             "Do part-time librarians get annual leave pro rata?",
             "Who approves annual leave requests at a branch?",
             "Are public holidays counted as annual leave days?"]),

        new("What is the mileage allowance for driving more than 40 km to another branch?",
            ["What mileage allowance do I get for driving more than 40 km to another branch?",
             "How much is the mileage allowance for driving more than 40 km to another branch?"],
            new("What is the mileage allowance for driving more than 80 km to another branch?", "amount", "40 km", "80 km"),
            "Staff who drive their own car more than 40 km to another branch can claim a mileage allowance of 0.35 per " +
            "kilometre for the whole trip. The mileage claim goes into the monthly expenses form with the date, the branches " +
            "visited and the distance driven.",
            ["How do I file a mileage claim in the expenses form?",
             "Are parking fees refunded when I drive to another branch?",
             "Is there a mileage allowance for trips shorter than 40 km?",
             "Can I claim travel costs when I take the bus to another branch?",
             "When are mileage claims paid out?"]),

        new("Can I swap shifts with a colleague without asking the branch manager?",
            ["Can I swap a shift with a colleague without asking the branch manager?",
             "Am I allowed to swap shifts with a colleague without asking the branch manager?"],
            new("Can I swap shifts with a colleague after asking the branch manager?", "negation", "without", "after"),
            "Staff may swap shifts with a colleague of the same grade, but every shift swap must be approved by the branch " +
            "manager before it takes place. Swaps are recorded in the rota so that the branch always has two staff on the floor.",
            ["How do I record a shift swap in the rota?",
             "Can I swap shifts with someone from another branch?",
             "How far in advance must a shift swap be approved?",
             "What happens if my swapped shift is not covered?",
             "Can a part-time colleague take over a full-time shift?"]),

        new("Who do I call when self-checkout kiosk SC-12 stops working?",
            ["Who should I call when self-checkout kiosk SC-12 stops working?",
             "Who do I call if the self-checkout kiosk SC-12 stops working?"],
            new("Who do I call when self-checkout kiosk SC-14 stops working?", "identifier", "SC-12", "SC-14"),
            "When self-checkout kiosk SC-12 stops working, call the IT service desk and give the kiosk number shown on its " +
            "side panel. Put an out-of-order sign on the kiosk and check items out at the front desk until it is repaired.",
            ["How do I restart a self-checkout kiosk?",
             "What is the phone number of the IT service desk?",
             "Where do I find the kiosk number on a self-checkout machine?",
             "Can members return items while the self-checkout kiosk is down?",
             "Who repairs self-checkout kiosks outside office hours?"]),

        new("What is the maximum number of items a member can borrow at once?",
            ["What is the maximum number of items that a member can borrow at once?",
             "What's the maximum number of items a member may borrow at once?"],
            new("What is the minimum number of items a member can borrow at once?", "opposite", "maximum", "minimum"),
            "A member can borrow at most 20 items at once across all branches, of which no more than 5 may be DVDs. The maximum " +
            "number of items borrowed is shown on the member's record, and staff can raise it for teachers and care homes.",
            ["Can the borrowing limit be raised for teachers?",
             "How many DVDs can a member borrow at once?",
             "Do e-books count towards the borrowing limit?",
             "What is the loan period for borrowed items?",
             "Can a member borrow items from several branches at once?"]),

        new("What time does the Marlow Street branch open on Saturdays?",
            ["When does the Marlow Street branch open on Saturdays?",
             "At what time does the Marlow Street branch open on Saturdays?"],
            new("What time does the Marlow Street branch close on Saturdays?", "opposite", "open", "close"),
            "The Marlow Street branch opens at 9:30 on Saturdays, and staff on the Saturday shift arrive fifteen minutes before " +
            "the branch opens to switch on the computers and empty the book drop.",
            ["What are the weekday opening hours of the Marlow Street branch?",
             "Is the Marlow Street branch open on Sundays?",
             "Who opens the Marlow Street branch on Saturday mornings?",
             "Does the Marlow Street branch open later on public holidays?",
             "How many staff work the Saturday shift at Marlow Street?"]),

        new("Are overdue fines waived for members under 16?",
            ["Do we waive overdue fines for members under 16?",
             "Are overdue fines waived for members who are under 16?"],
            new("Are overdue fines waived for members under 18?", "amount", "16", "18"),
            "Overdue fines are waived for members under 16: their cards show a junior flag and the system charges no fine on " +
            "late returns. Lost or damaged items are still charged to the parent or guardian.",
            ["Are lost items charged to junior members?",
             "How do I mark a member under 16 as junior so no overdue fines are charged?",
             "Do overdue fines apply to members over 65?",
             "Can a branch manager waive an overdue fine?",
             "What is the overdue fine per day for adults?"]),

        new("What do I do if a member loses their library card?",
            ["What should I do if a member loses their library card?",
             "What do I do when a member loses their library card?"],
            null,
            "If a member loses their library card, block the card in the library system at once so nobody else can borrow on " +
            "it, check the member's identity and print a new library card. The first replacement card is free.",
            ["How do I block a lost library card in the system?",
             "What identity documents can a member show for a new card?",
             "Is there a fee for a second replacement card?",
             "Can a member use the library app instead of a card?",
             "What if items were borrowed on a lost card?"]),

        new("How often does each branch hold a fire drill?",
            ["How often is a fire drill held at each branch?",
             "How frequently does each branch hold a fire drill?"],
            null,
            "Each branch holds a fire drill twice a year, once in spring and once in autumn. The branch fire warden plans the " +
            "fire drill, times the evacuation and records the result in the health and safety log.",
            ["Who is the fire warden at my branch?",
             "Where is the assembly point during a fire drill?",
             "How do I record a fire drill in the safety log?",
             "Do members have to leave the building during a fire drill?",
             "How often are the fire extinguishers checked?"]),

        new("How long does an interlibrary loan from the Ashby branch take?",
            ["How long does it take to get an interlibrary loan from the Ashby branch?",
             "How long will an interlibrary loan from the Ashby branch take?"],
            new("How long does an interlibrary loan from the Corran branch take?", "identifier", "Ashby", "Corran"),
            "An interlibrary loan from the Ashby branch usually takes three working days, because the van from Ashby runs on " +
            "Mondays, Wednesdays and Fridays. The member is told by text message when the loan arrives.",
            ["Which days does the delivery van run between branches?",
             "How is a member told that an interlibrary loan has arrived?",
             "Can a member request an interlibrary loan online?",
             "Is there a charge for an interlibrary loan?",
             "How long can a member keep an interlibrary loan?"]),

        new("When is the outdoor book drop emptied on weekdays?",
            ["When is the outdoor book drop emptied on a weekday?",
             "At what time is the outdoor book drop emptied on weekdays?"],
            new("When is the outdoor book drop emptied on weekends?", "opposite", "weekdays", "weekends"),
            "On weekdays the outdoor book drop is emptied at opening time and again at 2 pm. Returned items are checked in " +
            "straight away so that members do not get overdue notices for books already in the book drop.",
            ["Who empties the book drop at my branch?",
             "What do I do with damaged items found in the book drop?",
             "Are items in the book drop checked in on the same day?",
             "Can members return DVDs through the outdoor book drop?",
             "What if the book drop is full?"]),

        new("What should I do if a patron is abusive at the front desk?",
            ["What should I do when a patron is abusive at the front desk?",
             "What do I do if a patron becomes abusive at the front desk?"],
            null,
            "If a patron is abusive at the front desk, stay calm, do not argue, and ask a colleague to join you. If the patron " +
            "does not stop, ask them to leave, call security or the police if needed, and file an incident report the same day.",
            ["How do I file an incident report about an abusive patron?",
             "When can staff ban a patron from the library?",
             "Who do I call for security when a patron is abusive?",
             "Is there training on handling difficult patrons?",
             "Can I refuse to serve an abusive patron?"]),

        new("Who counts the cash float at the end of a shift?",
            ["Who counts the cash float at the end of each shift?",
             "At the end of a shift, who counts the cash float?"],
            new("Who counts the cash float at the beginning of a shift?", "opposite", "end", "beginning"),
            "At the end of a shift the senior staff member on duty counts the cash float with a second colleague as witness. " +
            "Both sign the cash sheet, and any difference of more than 5 in the cash float is reported to the branch manager.",
            ["What do I do if the cash float does not balance?",
             "Where is the cash sheet kept?",
             "How much money is in the cash float?",
             "Can one person count the cash float alone?",
             "When is cash taken to the bank?"]),

        new("How many hours of paid training does a new staff member get in the first month?",
            ["How many hours of paid training does a new staff member receive in the first month?",
             "How many paid training hours does a new staff member get in the first month?"],
            new("How many hours of paid training does a new staff member get in the second month?", "opposite", "first", "second"),
            "A new staff member gets 24 hours of paid training in the first month: the library system, customer service, " +
            "health and safety, and a day shadowing an experienced colleague. Training hours are logged in the staff portal.",
            ["Which training courses are compulsory for new staff?",
             "How do I log training hours in the staff portal?",
             "Is there a mentor for new staff members?",
             "Can part-time staff do the training online?",
             "When is the probation review for new staff?"]),

        new("How do I book the meeting room at the Ashby branch for a community group?",
            ["How can I book the meeting room at the Ashby branch for a community group?",
             "How do I reserve the meeting room at the Ashby branch for a community group?"],
            null,
            "To book the meeting room at the Ashby branch for a community group, use the room calendar in the staff portal and " +
            "enter the group's name and contact. Community groups book the meeting room for free on weekdays before 5 pm.",
            ["Is there a charge for booking the meeting room?",
             "How many people fit in the meeting room at the Ashby branch?",
             "Can community groups book the meeting room in the evening?",
             "Who unlocks the meeting room for an evening booking?",
             "Can a group serve food in the meeting room?"]),

        new("What temperature should the reading rooms be kept at in winter?",
            ["What temperature should reading rooms be kept at in winter?",
             "In winter, what temperature should the reading rooms be kept at?"],
            null,
            "In winter the reading rooms should be kept at a temperature between 19 and 21 degrees. If the temperature in a " +
            "reading room falls below 18 degrees, report it to facilities and move members to a warmer room.",
            ["Who do I call when the reading rooms are too cold in winter?",
             "How do I report a reading room temperature problem to facilities?",
             "Can staff use portable heaters in the reading rooms?",
             "What temperature should the children's area be kept at?",
             "When is the heating switched on for the season?"]),

        new("Can staff share a member's borrowing history with the police without a warrant?",
            ["Are staff allowed to share a member's borrowing history with the police without a warrant?",
             "May staff share a member's borrowing history with the police without a warrant?"],
            new("Can staff share a member's borrowing history with the police with a warrant?", "negation", "without", "with"),
            "Staff must not share a member's borrowing history with the police without a warrant. Refer any police request " +
            "to the data protection officer, who checks the warrant and decides what borrowing records may be released.",
            ["Who is the data protection officer who handles police requests for borrowing history?",
             "How long is a member's borrowing history kept?",
             "Can a member see their own borrowing history?",
             "What do I do if the police ask for member details at the desk?",
             "Can staff look up a member's address for a colleague?"]),

        new("Is overtime paid at 1.5 times the hourly rate?",
            ["Is overtime paid at 1.5 times the normal hourly rate?",
             "Do we pay overtime at 1.5 times the hourly rate?"],
            new("Is overtime paid at 2 times the hourly rate?", "amount", "1.5", "2"),
            "Overtime is paid at 1.5 times the hourly rate on weekdays and Saturdays, when the branch manager has approved the " +
            "overtime in advance. Staff may take time off in lieu instead of overtime pay.",
            ["Does overtime need to be approved in advance?",
             "Can I take time off in lieu instead of overtime pay?",
             "Is Sunday overtime paid at a higher rate?",
             "How do I claim overtime in the staff portal?",
             "Is there a limit on overtime hours per month?"]),

        new("Do staff have to wear a name badge on the library floor?",
            ["Do staff need to wear a name badge on the library floor?",
             "Must staff wear a name badge on the library floor?"],
            null,
            "Yes: staff wear their name badge at all times on the library floor so that members can tell who works there. A " +
            "lost name badge is replaced by the branch office; staff may show a first name only on the badge.",
            ["How do I get a replacement name badge?",
             "Can my name badge show only my first name?",
             "Is there a dress code for library staff?",
             "Do volunteers wear name badges too?",
             "Do staff wear a lanyard or a pin badge?"]),

        new("How many people can attend an event in the Riverside branch hall?",
            ["How many people may attend an event in the Riverside branch hall?",
             "How many people are allowed to attend an event in the Riverside branch hall?"],
            new("How many people can attend an event in the Harbour branch hall?", "identifier", "Riverside", "Harbour"),
            "Up to 80 people can attend an event in the Riverside branch hall, seated, or 120 standing. Events with more than " +
            "50 people need a second member of staff on duty and a fire warden in the hall.",
            ["How do I book the Riverside branch hall for an event?",
             "Is there a charge for using the branch hall?",
             "Who sets up the chairs for an event in the hall?",
             "Can an event in the branch hall run after closing time?",
             "Are refreshments allowed at events in the hall?"]),

        new("Is a staff member allowed to work alone in a branch after 6 pm?",
            ["Can a staff member work alone in a branch after 6 pm?",
             "Is it allowed for a staff member to work alone in a branch after 6 pm?"],
            new("Is a staff member allowed to work alone in a branch after 8 pm?", "amount", "6 pm", "8 pm"),
            "No staff member may work alone in a branch after 6 pm. Evening shifts are staffed by at least two people, and the " +
            "last two staff members to leave lock up the branch together and sign the closing log.",
            ["What is the lone working policy for small branches?",
             "Who locks up the branch in the evening?",
             "What if my colleague is late and I would work alone in the branch?",
             "Is there a panic alarm for staff working alone in a branch?",
             "How do staff sign the closing log when they lock up the branch?"]),

        new("How many weeks of paid parental leave does the network offer?",
            // Not "the library network": a qualifier added is read as a change of scope by the hit decision (README).
            ["How many weeks of parental leave with pay does the network offer?",
             "How many weeks of paid parental leave are offered by the network?"],
            new("How many weeks of unpaid parental leave does the network offer?", "negation", "paid", "unpaid"),
            "The network offers 16 weeks of paid parental leave to staff with at least one year of service, and a further " +
            "10 weeks of unpaid leave on request. Parental leave is requested from human resources eight weeks ahead.",
            ["How do I request parental leave from human resources?",
             "Can parental leave be split into several blocks?",
             "Do part-time staff get paid parental leave?",
             "Can I return part-time after parental leave?",
             "Does parental leave count towards annual leave?"]),

        new("How long can a member use a public computer per day?",
            ["How long may a member use a public computer per day?",
             "How long can a member use the public computers each day?"],
            null,
            "A member can use a public computer for up to two hours per day, booked in one-hour sessions at the front desk or " +
            "in the library app. Staff can extend a session when no other member is waiting for a public computer.",
            ["How does a member book a public computer?",
             "Can visitors without a library card use a public computer?",
             "How much does printing from a public computer cost?",
             "Are children allowed to use the public computers alone?",
             "Can staff extend a member's computer session?"]),

        new("Does the library accept donated books that are more than 10 years old?",
            ["Does the library take donated books that are more than 10 years old?",
             "Will the library accept donated books more than 10 years old?"],
            new("Does the library accept donated books that are less than 10 years old?", "opposite", "more", "less"),
            "The library does not add donated books that are more than 10 years old to the collection, except local history. " +
            "Such donated books may go to the book sale; staff thank the donor and explain the donation policy.",
            ["Where do donated books go if they are not added?",
             "Does the library accept donated DVDs?",
             "Who decides which donations join the collection?",
             "Can donors get a receipt for donated books?",
             "Are local history books always accepted?"]),
    ];
}
