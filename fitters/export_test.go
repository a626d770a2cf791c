package fitters

// Unexported pieces reached by the external tests of this package.
var (
	NewGRPCServer         = newGRPCServer
	SendFit               = sendFit
	WireSettingsToProto   = settingsToProto
	WireSettingsFromProto = settingsFromProto
	WireReportToProto     = reportToProto
	WireReportFromProto   = reportFromProto
	WireInfoToDescribe    = infoToDescribe
	WireInfoFromDescribe  = infoFromDescribe
	WireProgressToProto   = progressToProto
	WireProgressFromProto = progressFromProto
	WatchParent           = watchParent
)
