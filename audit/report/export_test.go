package report

// DailyRecheck is dailyRecheck, for the external tests.
const DailyRecheck = dailyRecheck
