"""The computing core of appraise. Imports no Qt; everything here runs headless."""
