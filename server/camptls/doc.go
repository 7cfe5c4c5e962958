// Package camptls gives the camp server the HTTPS that phones need for the
// offline app (browsers only run service workers in a secure context).
//
// On first use it creates a local certificate authority, kept beside the
// data file, and signs a server certificate for the laptop's current LAN
// addresses and host name. Phones trust the authority once, from the plain
// HTTP setup page (see Setup), and from then on accept every server
// certificate it signs, including the ones made automatically when the
// laptop's addresses change or the certificate nears expiry.
//
// Certificates follow what current phones require: a subject alternative
// name for every address and name, the server-authentication extended key
// usage, ECDSA P-256 keys with SHA-256 signatures, and a leaf lifetime of
// 397 days, inside both the 825-day limit phones apply to locally trusted
// authorities and the 398-day limit for public ones.
package camptls
