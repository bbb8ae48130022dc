package web

// Placeholders for work in progress on other issues go here until their
// handlers land in files of their own.
