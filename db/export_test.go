package db

// The definitions' SQL, for the tests that hold it to its rule
// (definitions_test.go).
var ParticipantStatusSQL = participantStatus

const AwaitingReadSQL = awaitingRead
